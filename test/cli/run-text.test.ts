/**
 * What `plumbline run` prints for a sweep's fit: a wrong answer is never silent. A fit the analysis
 * marks not plausible says so on its line, with each of its warnings, and a parameter whose
 * uncertainty could not be determined says that instead of showing a bare number.
 */
import { describe as suite, expect, it } from 'vitest';
import { describe } from '../../daemon/cli/station-common.js';
import type { FitSummary, WireEvent } from '../../protocols/wire.js';

function fitEvent(fit: Partial<FitSummary>): WireEvent {
  const base: FitSummary = {
    model: 'fowler-nordheim',
    title: 'Fowler–Nordheim tunnelling',
    window: { from: 5, to: 8, mode: 'auto' },
    line: { slope: -1, slopeStdErr: 0.01, intercept: 0, interceptStdErr: 0.01, r2: 0.99, residualStdDev: 0.01, n: 41 },
    axes: { x: { label: '1/E', unit: 'm/V', kind: 'linear' }, y: { label: 'J/E²', unit: 'A/m^2/(V/m)^2', kind: 'log' } },
    parameters: { barrierHeight: { value: 3.1, stdErr: 0.002, unit: 'eV' } },
    plausible: true,
    warnings: [],
    points: { used: 41, excluded: 0, reasons: {} },
    regimes: [],
  };
  return { type: 'fit', seq: 1, t: 0, sweep: 1, final: true, fit: { ...base, ...fit } } as WireEvent;
}

suite('run: a sweep fit line', () => {
  it('a plausible fit: the value with its uncertainty, nothing more', () => {
    const text = describe(fitEvent({})) as string;
    expect(text).toMatch(/^sweep 1: fowler-nordheim fit on 41 points, barrierHeight = 3\.1000 ± 0\.0020 eV$/);
  });

  it('an implausible fit says NOT PLAUSIBLE and prints every warning; a missing uncertainty is named', () => {
    const text = describe(
      fitEvent({
        parameters: { barrierHeight: { value: 61.3, stdErr: null as unknown as number, unit: 'eV' } },
        plausible: false,
        warnings: ['barrier height = 61.3 eV is outside the plausible range 0.3–6 eV', 'the points scatter more than the noise allows'],
      }),
    ) as string;
    const lines = text.split('\n');
    expect(lines[0]).toMatch(/barrierHeight = 61\.3\d* eV \(uncertainty not determined\) — NOT PLAUSIBLE$/);
    expect(lines.slice(1)).toEqual([
      '         warning: barrier height = 61.3 eV is outside the plausible range 0.3–6 eV',
      '         warning: the points scatter more than the noise allows',
    ]);
  });

  it('a drift line is in the unit of the fit line above it (mobility in cm²/(V·s); 1 m² = 1e4 cm²)', () => {
    const text = describe({
      type: 'drift',
      seq: 2,
      t: 0,
      sweep: 6,
      parameter: 'mobility',
      value: 1e-8,
      unit: 'm^2/(V*s)',
      method: 'ewma',
      phase: 'monitor',
      statistic: 1.0001e-8,
      center: 1e-8,
      lower: 9.9868e-9,
      upper: 1.0016e-8,
      sigma: 1e-11,
      state: 'in-control',
    } as WireEvent) as string;
    expect(text.trim()).toBe('drift of mobility: in-control (ewma 1.0001e-4 cm²/(V·s), limits 9.9868e-5 cm²/(V·s) … 1.0016e-4 cm²/(V·s))');
  });
});

suite('run: an adaptive sweep line', () => {
  it('the charge in the exponent form the fit lines use (1.39e-6 C, not 0.00000139 C) and the parameter as the fit line shows it', () => {
    const ev = {
      type: 'adaptive-sweep',
      seq: 2,
      t: 0,
      sweep: 2,
      readings: 19,
      maxAbsBias: 9,
      charge: 1.39e-6,
      parameter: { name: 'barrierHeight', value: 3.10012, stdErr: 0.00018, unit: 'eV' },
      stopReason: 'target-reached',
    } as unknown as WireEvent;
    const text = describe(ev) as string;
    expect(text).toBe('sweep 2: 19 readings, |bias| up to 9.000 V, 1.39e-6 C passed; barrierHeight = 3.10012 ± 0.00018 eV; stopped: target-reached');
    // The same digits as the sweep's fit line.
    const fit = describe(fitEvent({ parameters: { barrierHeight: { value: 3.10012, stdErr: 0.00018, unit: 'eV' } } })) as string;
    expect(fit.endsWith('barrierHeight = 3.10012 ± 0.00018 eV')).toBe(true);
  });
});
