/** Tiny timing helpers for the benchmark scripts: median of repeated runs, in milliseconds. */
export function medianMs(fn: () => void, repeats: number): number {
  for (let k = 0; k < 3; k++) fn(); // warm-up (JIT tiers settle after a few calls)
  const t: number[] = [];
  for (let k = 0; k < repeats; k++) {
    const s = process.hrtime.bigint();
    fn();
    t.push(Number(process.hrtime.bigint() - s) / 1e6);
  }
  t.sort((a, b) => a - b);
  return t[t.length >> 1];
}

export function report(name: string, value: number, unit: string, target?: string): void {
  const v = value >= 100 ? value.toFixed(0) : value >= 1 ? value.toFixed(2) : value.toPrecision(3);
  process.stdout.write(`${name.padEnd(52)} ${v.padStart(10)} ${unit}${target ? `   (target ${target})` : ''}\n`);
}
