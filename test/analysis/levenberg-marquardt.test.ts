/**
 * The Levenberg–Marquardt engine against the NIST StRD nonlinear regression datasets of lower and
 * average difficulty (certified values in ../shared/reference-data/strd, read at run time), from
 * both certified starting points. The bar: at least 6 significant digits (log relative error ≥ 6,
 * McCullough 1998, The American Statistician 52:358) in every
 * parameter. The models are evaluated from NIST's own model expression by mathjs (a general-purpose
 * reference library), so no model is retyped here.
 */
import { compile } from 'mathjs';
import { describe, expect, it } from 'vitest';
import { levenbergMarquardt } from '../../daemon/analysis/levenberg-marquardt.js';
import { seededNormal } from '../../daemon/analysis/random.js';
import { HAVE_STRD, loadStrd, lre } from '../helpers/reference.js';

const SETS = ['Misra1a', 'Chwirut2', 'DanWood', 'Misra1b', 'Kirby2', 'MGH17', 'Misra1c', 'Misra1d'];

function fitStrd(name: string, start: 'start1' | 'start2', geodesic = false) {
  const d = loadStrd(name);
  const names = d.parameterNames;
  // NIST writes powers as '**'; mathjs writes them as '^'.
  const expr = compile(d.modelExpression.replace(/\*\*/g, '^'));
  const scope: Record<string, number> = {};
  return {
    d,
    names,
    result: levenbergMarquardt(
      {
        n: d.x.length,
        p0: names.map((k) => (d[start] as Record<string, number>)[k]),
        residuals: (p, r) => {
          for (let j = 0; j < names.length; j++) scope[names[j]] = p[j];
          for (let i = 0; i < d.x.length; i++) {
            scope.x = d.x[i];
            r[i] = (expr.evaluate(scope) as number) - d.y[i];
          }
        },
      },
      { geodesic },
    ),
  };
}

describe.skipIf(!HAVE_STRD)('Levenberg–Marquardt on NIST StRD nonlinear sets (lower and average difficulty)', () => {
  for (const name of SETS) {
    for (const start of ['start1', 'start2'] as const) {
      it(`${name} from ${start}: parameters, standard deviations and residual SD to ≥ 6 digits`, () => {
        const { d, names, result } = fitStrd(name, start);
        expect(result.converged, result.reason).toBe(true);
        names.forEach((k, j) => {
          const cert = d.certified.params[k];
          expect(lre(result.p[j], cert.value), `${k} = ${result.p[j]} vs ${cert.valueText}`).toBeGreaterThanOrEqual(6);
          expect(lre(result.stdErr[j], cert.sd), `sd(${k}) = ${result.stdErr[j]} vs ${cert.sdText}`).toBeGreaterThanOrEqual(4);
        });
        expect(lre(result.sse, d.certified.residualSumOfSquares)).toBeGreaterThanOrEqual(6);
      });
    }
  }
});

describe.skipIf(!HAVE_STRD)('Levenberg–Marquardt with geodesic acceleration (an option of the engine)', () => {
  for (const name of ['Misra1a', 'Kirby2', 'MGH17']) {
    it(`${name} from start1: parameters to ≥ 6 digits`, () => {
      const { d, names, result } = fitStrd(name, 'start1', true);
      expect(result.converged, result.reason).toBe(true);
      names.forEach((k, j) => expect(lre(result.p[j], d.certified.params[k].value), k).toBeGreaterThanOrEqual(6));
    });
  }
});

describe('Levenberg–Marquardt: bounds and an analytic Jacobian', () => {
  it('fits y = a·exp(b·x) with the analytic Jacobian and agrees with the numeric one', () => {
    // Exact data from a = 2, b = −0.7 (worked by hand: residuals vanish at the truth).
    const x = [0, 0.5, 1, 1.5, 2, 3, 4];
    const y = x.map((t) => 2 * Math.exp(-0.7 * t));
    const base = {
      n: x.length,
      p0: [1, -0.1],
      residuals: (p: Float64Array, r: Float64Array) => {
        for (let i = 0; i < x.length; i++) r[i] = p[0] * Math.exp(p[1] * x[i]) - y[i];
      },
    };
    const numeric = levenbergMarquardt(base);
    const analytic = levenbergMarquardt({
      ...base,
      jacobian: (p, J) => {
        for (let i = 0; i < x.length; i++) {
          const e = Math.exp(p[1] * x[i]);
          J[i * 2] = e;
          J[i * 2 + 1] = p[0] * x[i] * e;
        }
      },
    });
    for (const r of [numeric, analytic]) {
      expect(r.p[0]).toBeCloseTo(2, 12);
      expect(r.p[1]).toBeCloseTo(-0.7, 12);
    }
  });

  it('keeps a parameter inside its bounds and reports it on the bound', () => {
    // Minimum of (p − 3)² + (q − 1)² subject to p ≤ 2: p = 2 on the bound, q = 1.
    const r = levenbergMarquardt({
      n: 2,
      p0: [0, 0],
      upper: [2, Infinity],
      residuals: (p, out) => {
        out[0] = p[0] - 3;
        out[1] = p[1] - 1;
      },
    });
    expect(r.p[0]).toBe(2);
    expect(r.p[1]).toBeCloseTo(1, 10);
    expect(r.atBound).toEqual([0]);
  });

  it('a stall stop ends a crawl along a valley the data do not determine, short of the end by an insignificant χ²', () => {
    // Two exponentials fitted to noisy data from one (the classic ill-determined case: the split
    // between the two terms is undetermined). With the stop, the fit ends once 5 steps gain less
    // than 0.01·s² together; without it, it crawls on for many more steps.
    const normal = seededNormal(3);
    const x = Array.from({ length: 200 }, (_, k) => k / 40);
    const y = x.map((t) => 3 * Math.exp(-1.2 * t) + 0.01 * normal());
    const problem = {
      n: x.length,
      p0: [1, -0.5, 1, -2],
      residuals: (p: Float64Array, r: Float64Array) => {
        for (let i = 0; i < x.length; i++) r[i] = p[0] * Math.exp(p[1] * x[i]) + p[2] * Math.exp(p[3] * x[i]) - y[i];
      },
    };
    const free = levenbergMarquardt(problem, { maxIterations: 2000, xtol: 1e-15, ftol: 1e-15 });
    const stopped = levenbergMarquardt(problem, { maxIterations: 2000, xtol: 1e-15, ftol: 1e-15, stall: { iterations: 5, fraction: 1e-2 } });
    const s2 = free.sse / (x.length - 4);
    expect(stopped.reason).toBe('SSE reduction below the noise');
    expect(stopped.converged).toBe(true);
    expect(stopped.iterations, `${stopped.iterations} iterations against ${free.iterations}`).toBeLessThan(free.iterations);
    // What the crawl still gains is not significant: below the 95 % point of χ² with 2 degrees of
    // freedom (5.99; the split between the two terms is what the valley leaves undetermined).
    expect((stopped.sse - free.sse) / s2, `SSE ${stopped.sse} against ${free.sse}, s² ${s2}`).toBeLessThan(5.99);
  });
});
