/**
 * Passive sources into the live chain: lines another program writes (a growing CSV, stdin, a
 * serial or TCP stream) → readings (CsvRowMapper; malformed rows journaled as rejected with their
 * line number and skipped) → sweeps found from direction reversals of the bias and from steps of
 * the temperature column → the same chain, journal and page as a live run, with no control of the
 * instrument.
 */
import { fromEvent, merge, map, takeUntil, type Subscription } from 'rxjs';
import { type ColumnMapping, type ColumnsInUse, CsvRowMapper, describeColumns } from '../../protocols/csv-rows.js';
import type { LineSource } from '../../protocols/line-source.js';
import type { LiveChain } from './chain.js';

/**
 * Splits a stream of bias values into sweeps at direction reversals: a step whose sign is opposite
 * to the sweep's direction so far (steps smaller than `tolerance` V are ignored) starts a new sweep.
 * A staircase that jumps back to its start, and each leg of an out-and-back sweep, become sweeps.
 */
export class ReversalSegmenter {
  private last: number | undefined;
  private dir = 0;

  constructor(readonly tolerance = 1e-9) {}

  /** Returns true when v starts a new sweep (the first value always does). */
  next(v: number): boolean {
    const prev = this.last;
    this.last = v;
    if (prev === undefined) return true;
    const d = v - prev;
    if (Math.abs(d) <= this.tolerance) return false;
    const s = Math.sign(d);
    if (this.dir === 0) {
      this.dir = s;
      return false;
    }
    if (s !== this.dir) {
      this.dir = 0;
      return true;
    }
    return false;
  }

  /** A new sweep was begun at v for another reason (a temperature step): its direction is not known yet. */
  restartAt(v: number): void {
    this.last = v;
    this.dir = 0;
  }

  reset(): void {
    this.last = undefined;
    this.dir = 0;
  }
}

/** Kelvin: a temperature series is taken at set points several kelvin apart (common practice). */
export const DEFAULT_TEMPERATURE_STEP = 2;

/**
 * Finds the reading at which the temperature column steps to a new set point: one further than
 * `step` K from the mean of the open sweep's last few temperatures starts a new sweep. The bias
 * alone cannot place the reading where a sweep turns: sweeps taken up at one temperature and down
 * at the next (or out and back, the next starting where the last ended) repeat the turning bias,
 * and that repeated reading belongs to the next temperature. A chuck wandering a few tenths of a
 * kelvin about its set point, or drifting slowly through a sweep, starts nothing.
 */
export class TemperatureSteps {
  private recent: number[] = [];

  constructor(
    readonly step = DEFAULT_TEMPERATURE_STEP,
    readonly span = 5,
  ) {}

  /** Whether t has stepped away from the open sweep's temperatures (the first reading never has). */
  stepped(t: number): boolean {
    if (this.recent.length === 0) return false;
    let sum = 0;
    for (const x of this.recent) sum += x;
    return Math.abs(t - sum / this.recent.length) > this.step;
  }

  /** Records t as the open sweep's; `fresh` when it is the first reading of a new sweep. */
  add(t: number, fresh: boolean): void {
    if (fresh) this.recent = [];
    this.recent.push(t);
    if (this.recent.length > this.span) this.recent.shift();
  }

  reset(): void {
    this.recent = [];
  }
}

export interface PassiveStats {
  lines: number;
  readings: number;
  rejected: number;
  sweeps: number;
}

/**
 * Feeds a line source into the chain until the source ends or `stop(reason)` is called. A sweep the
 * source ends is complete; one cut by `stop` or by the file starting again (truncated, replaced) is
 * not, and its sweep-end says why. `onColumns` hears the columns in use when a header (or a first
 * row) fixes them, and again if a restarted file's header changes them. A header the mapping does
 * not fit (a named column it lacks) stops the feed: `done` rejects with the CsvError.
 */
export function feedPassive(
  source: LineSource,
  chain: LiveChain,
  mapping: ColumnMapping,
  where: string,
  temperatureStep = DEFAULT_TEMPERATURE_STEP,
  onColumns: (columns: ColumnsInUse, text: string) => void = () => undefined,
): { stats: PassiveStats; done: Promise<void>; stop(reason: string): void } {
  const mapper = new CsvRowMapper(mapping, where);
  let told = '';
  const tell = () => {
    const c = mapper.columns;
    if (!c) return;
    const text = describeColumns(c);
    if (text !== told) onColumns(c, text);
    told = text;
  };
  const seg = new ReversalSegmenter();
  const temps = new TemperatureSteps(temperatureStep);
  const stats: PassiveStats = { lines: 0, readings: 0, rejected: 0, sweeps: 0 };
  let open = false;
  let tSum = 0;
  let tN = 0;
  const endSweep = (complete: boolean, note?: string) => {
    if (open) {
      chain.endSweep(complete, note);
      // A temperature column tags the sweep (the mean over its readings) for the temperature series.
      if (tN > 0)
        chain.emit({
          type: 'annotation',
          text: `T = ${+(tSum / tN).toPrecision(6)} K (mean of the temperature column)`,
          tags: ['temperature'],
          sweep: stats.sweeps,
          source: 'watch',
        });
    }
    open = false;
    tSum = 0;
    tN = 0;
  };
  let resolveDone: () => void = () => undefined;
  let rejectDone: (e: Error) => void = () => undefined;
  const done = new Promise<void>((res, rej) => {
    resolveDone = res;
    rejectDone = rej;
  });
  const end$ = fromEvent(source, 'end');
  const lines$ = fromEvent(source, 'line', (line: string, n: number) => ({ line, n }));
  const notices$ = fromEvent(source, 'notice', (text: string) => ({ notice: text }));
  let sub: Subscription | undefined;
  let finished = false;
  /** Ends the open sweep (complete when the source itself ended) and the feed. */
  const finish = (complete: boolean, why?: string, failure?: Error) => {
    if (finished) return;
    finished = true;
    endSweep(complete, why);
    sub?.unsubscribe();
    if (failure) rejectDone(failure);
    else resolveDone();
  };
  sub = merge(lines$, notices$)
    .pipe(
      map((x) => x as { line?: string; n?: number; notice?: string }),
      takeUntil(end$),
    )
    .subscribe({
      next: (x) => {
        if (x.notice !== undefined) {
          // Truncation or rotation: the file starts again (with its header); the sweep in progress
          // was cut short.
          endSweep(false, `cut short: ${x.notice}`);
          mapper.reset();
          seg.reset();
          temps.reset();
          chain.emit({ type: 'caution', kind: 'passive-source', message: x.notice });
          return;
        }
        stats.lines++;
        let r: ReturnType<CsvRowMapper['map']>;
        try {
          r = mapper.map(x.line as string);
        } catch (e) {
          // The columns asked for are not in the header: no row can be read; the feed stops.
          const failure = e as Error;
          chain.rejected(x.line as string, `${where} line ${x.n}: ${failure.message}`);
          stats.rejected++;
          finish(false, `cut short: ${failure.message}`, failure);
          void source.stop();
          return;
        }
        tell();
        if (r.kind === 'rejected') {
          chain.rejected(x.line as string, `${where} line ${x.n}: ${r.reason}`);
          stats.rejected++;
          return;
        }
        if (r.kind !== 'reading') return;
        // Both rules see every reading; either one starts a sweep at this reading.
        const stepped = r.temperature !== undefined && temps.stepped(r.temperature);
        const turned = seg.next(r.reading.v);
        if (stepped && !turned) seg.restartAt(r.reading.v);
        if (stepped || turned) {
          endSweep(true);
          stats.sweeps++;
          chain.startSweep(stats.sweeps, 0, `sweep ${stats.sweeps} (from ${where})`);
          open = true;
        }
        if (r.temperature !== undefined) {
          temps.add(r.temperature, tN === 0);
          tSum += r.temperature;
          tN++;
          // The sweep's fits take its own temperature (the mean so far), not the setting's.
          chain.setSweepTemperature(tSum / tN);
        }
        chain.reading(r.reading.v, r.reading.i, r.compliance, r.reading.overflow);
        stats.readings++;
      },
      error: (e: unknown) => finish(false, `cut short: ${(e as Error)?.message ?? String(e)}`),
      complete: () => finish(true),
    });
  return {
    stats,
    done,
    stop: (reason: string) => {
      finish(false, `cut short: ${reason}`);
      void source.stop();
    },
  };
}
