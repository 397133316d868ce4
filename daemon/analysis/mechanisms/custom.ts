/**
 * `custom`: the user's own linearization. x and y are mathjs expressions over the data's columns
 * (by header name, or c1, c2 … by position), and the y axis is declared 'log' (fitted as ln y) or
 * 'linear'. Only the line is reported: a custom transform has no physics attached.
 */
import type { EvalFunction, MathJsInstance } from 'mathjs';

/** mathjs is loaded by the caller (see setExpressionEngine) so that analysis/ stays free of Node APIs. */
let engine: Pick<MathJsInstance, 'compile'> | undefined;
export function setExpressionEngine(e: Pick<MathJsInstance, 'compile'>): void {
  engine = e;
}
function compile(expr: string): EvalFunction {
  if (!engine) throw new AnalysisError('BAD_EXPRESSION', 'no expression engine: call setExpressionEngine(mathjs) first', 'x-expr');
  return engine.compile(expr);
}
import { AnalysisError } from '../errors.js';
import type { AxisKind, Mechanism } from '../mechanism.js';

export interface CustomSpec {
  readonly x: string;
  readonly y: string;
  readonly yAxis: AxisKind;
}

export function customMechanism(spec: CustomSpec): Mechanism {
  return {
    id: 'custom',
    title: `Custom: ${spec.y} against ${spec.x}`,
    yKind: spec.yAxis,
    bias: 'raw',
    requires: [],
    uses: [],
    usesArea: false,
    ranked: false,
    axes: () => ({
      x: { label: spec.x, unit: '', kind: 'linear' },
      y: { label: spec.y, unit: '', kind: spec.yAxis },
    }),
    x: (v) => v,
    lnOffset: () => 0,
    extract: () => ({ parameters: {}, warnings: [], plausible: true, notes: [] }),
    forward: () => Number.NaN,
  };
}

/** Identifier a column can be called by in an expression (header made safe), plus c1, c2 …. */
export function columnIdentifiers(headers: readonly string[]): string[][] {
  return headers.map((h, k) => {
    const safe = h
      .trim()
      .replace(/[^A-Za-z0-9_]/g, '_')
      .replace(/^([0-9])/, '_$1');
    return safe && safe !== `c${k + 1}` ? [safe, `c${k + 1}`] : [`c${k + 1}`];
  });
}

/** Compiles both expressions; throws BAD_EXPRESSION naming the setting on a syntax error. */
export function compileCustom(spec: CustomSpec): { x: EvalFunction; y: EvalFunction } {
  const one = (expr: string, name: string): EvalFunction => {
    try {
      return compile(expr);
    } catch (e) {
      throw new AnalysisError('BAD_EXPRESSION', `${name} expression '${expr}': ${(e as Error).message}`, name);
    }
  };
  return { x: one(spec.x, 'x-expr'), y: one(spec.y, 'y-expr') };
}

/** Evaluates a compiled expression to a finite number, or returns undefined. */
export function evalNumber(f: EvalFunction, scope: Record<string, number>): number | undefined {
  try {
    const r: unknown = f.evaluate({ ...scope });
    return typeof r === 'number' && Number.isFinite(r) ? r : undefined;
  } catch {
    return undefined;
  }
}
