/**
 * The one number formatter and the display units shared by the command line, the page and the
 * report. Unit scales are checked against mathjs's unit conversions (an independent, general
 * purpose library); the rounding of a value with its uncertainty follows the GUM (JCGM 100:2008,
 * §7.2.6: the uncertainty to at most two significant digits, the value to the same place).
 */
import { evaluate, unit } from 'mathjs';
import { describe, expect, it } from 'vitest';
import { RESULT_COLUMNS } from '../../protocols/device-results.js';
import {
  axisLabel,
  displayUnit,
  formatInputs,
  formatParameterText,
  fromDisplay,
  INPUTS,
  prettyUnit,
  RESULT_FIGURES,
  toDisplay,
} from '../../protocols/display-units.js';
import {
  formatFixed,
  formatLogTick,
  formatLogTicks,
  formatMeasurement,
  formatNumber,
  formatTicks,
  logTicks,
  niceTicks,
} from '../../protocols/number-format.js';

describe('formatNumber', () => {
  it('writes plain decimals from 1e-3 to 1e5 and exponents outside', () => {
    expect(formatNumber(0.005)).toBe('0.005');
    expect(formatNumber(3.14172)).toBe('3.142');
    expect(formatNumber(12345.6, 4)).toBe('12350');
    expect(formatNumber(2.5e-9)).toBe('2.5e-9');
    expect(formatNumber(-1.23456e7)).toBe('-1.235e7');
    expect(formatNumber(0)).toBe('0');
    expect(formatNumber(99999.7, 4)).toBe('1e5');
    expect(formatNumber(Number.POSITIVE_INFINITY)).toBe('∞');
  });
});

describe('formatMeasurement (GUM rounding)', () => {
  it('keeps two significant digits of the uncertainty and rounds the value to that place', () => {
    expect(formatMeasurement(3.15234, 0.02134)).toBe('3.152 ± 0.021');
    expect(formatMeasurement(2.0, 12.34)).toBe('2 ± 12');
    expect(formatMeasurement(-0.51234, 0.0099)).toBe('-0.5123 ± 0.0099');
    expect(formatMeasurement(300.04, 0.5)).toBe('300.04 ± 0.50');
  });
  it('shares one exponent outside the plain range', () => {
    expect(formatMeasurement(1.23456e-9, 5.1e-11)).toBe('(1.235 ± 0.051)e-9');
    expect(formatMeasurement(2.5e-12, 3.3e-11)).toBe('(0.3 ± 3.3)e-11');
    expect(formatMeasurement(4.2e6, 1.1e5)).toBe('(4.20 ± 0.11)e6');
  });
  it('an uncertainty thousands of times the value (not determined) does not round the value to zero', () => {
    expect(formatMeasurement(3.986, 2.367e56)).toBe('3.986 ± 2.4e56');
    expect(formatMeasurement(-1.5e-9, 4e-5)).toBe('-1.5e-9 ± 4e-5');
  });
  it('prints the value alone without a usable uncertainty', () => {
    expect(formatMeasurement(1.234567, 0)).toBe('1.2346');
    expect(formatMeasurement(1.234567, Number.NaN)).toBe('1.2346');
  });
  it('the printed value is within half a unit of its last digit of the true value', () => {
    for (const [v, s] of [
      [3.14172, 0.0123],
      [7.77e-8, 2.2e-10],
      [1234.5678, 3.21],
      [-0.000567, 0.0000123],
    ]) {
      const t = formatMeasurement(v, s);
      const m = /^\(?(-?[\d.]+) ± ([\d.]+)\)?(?:e(-?\d+))?$/.exec(t);
      expect(m, t).not.toBeNull();
      const scale = m?.[3] ? 10 ** Number(m[3]) : 1;
      const shown = Number(m?.[1]) * scale;
      const decimals = (m?.[1].split('.')[1] ?? '').length;
      expect(Math.abs(shown - v), `${t} for ${v}`).toBeLessThanOrEqual(0.5 * 10 ** -decimals * scale * (1 + 1e-9));
      expect((Number(m?.[2]) * scale) / s).toBeCloseTo(1, 1);
    }
  });
});

describe('no negative zero', () => {
  it('a value that rounds to zero is written without a sign (common practice: -0.000 reads as a reading below zero)', () => {
    expect(formatFixed(-0.00004, 3)).toBe('0.000');
    expect(formatFixed(-0, 3)).toBe('0.000');
    expect(formatFixed(-0.4, 0)).toBe('0');
    expect(formatFixed(-0.0006, 3)).toBe('-0.001');
    expect(formatFixed(1.5, 3)).toBe('1.500');
    expect(formatMeasurement(-4e-12, 5e-10)).toBe('(0.0 ± 5.0)e-10');
    expect(formatMeasurement(-0.004, 0.5)).toBe('0.00 ± 0.50');
  });
});

describe('ticks', () => {
  it('labels are distinct with the fewest digits', () => {
    expect(formatTicks([3.1, 3.1000001, 3.1000002])).toEqual(['3.1000000', '3.1000001', '3.1000002']);
    expect(formatTicks([0, 0.5, 1, 1.5])).toEqual(['0.0', '0.5', '1.0', '1.5']);
    expect(formatTicks([0, 2, 4])).toEqual(['0', '2', '4']);
    expect(formatTicks([1e-9, 2e-9, 3e-9])).toEqual(['1e-9', '2e-9', '3e-9']);
    expect(formatTicks([9.999e-5, 1e-4, 1.0001e-4])).toEqual(['9.9990e-5', '1.0000e-4', '1.0001e-4']);
    expect(formatTicks([-1e-3, 0, 1e-3, 2e-3])).toEqual(['-0.001', '0.000', '0.001', '0.002']);
    expect(formatTicks([-2e-4, 0, 2e-4])).toEqual(['-2e-4', '0', '2e-4']);
  });
  it('a label always reads as its tick (2.5 is never shown as 3)', () => {
    expect(formatTicks([0, 2.5, 5, 7.5, 10])).toEqual(['0.0', '2.5', '5.0', '7.5', '10.0']);
    for (const [a, b] of [
      [0, 10],
      [3.09999, 3.10001],
      [1e-25, 1.7e-25],
      [-0.37, 0.41],
      [0.95, 1.05],
    ]) {
      const t = niceTicks(a, b);
      const l = formatTicks(t);
      const step = t[1] - t[0];
      l.forEach((x, k) => expect(Math.abs(Number(x) - t[k]), `${x} for ${t[k]}`).toBeLessThanOrEqual(step * 1e-6));
    }
    const l = formatTicks(niceTicks(3.09999, 3.10001));
    expect(new Set(l).size).toBe(l.length);
  });
  it('niceTicks gives at least three ticks on any range with width', () => {
    expect(niceTicks(0, 10)).toEqual([0, 2, 4, 6, 8, 10]);
    expect(niceTicks(-1, 1)).toEqual([-1, -0.5, 0, 0.5, 1]);
    for (const [a, b] of [
      [0.95, 1.05],
      [1e-25, 1.7e-25],
      [3.1, 3.11],
      [-2e-3, 1e-3],
    ])
      expect(niceTicks(a, b).length, `${a}…${b}`).toBeGreaterThanOrEqual(3);
  });
  it('log ticks: decades, or 1-2-5 steps when fewer than three decades fit', () => {
    expect(logTicks(1e-12, 1e-3)).toEqual([1e-12, 1e-10, 1e-8, 1e-6, 1e-4]);
    expect(logTicks(1e-6, 1e-4)).toEqual([1e-6, 1e-5, 1e-4]);
    expect(logTicks(1.5e-6, 3e-5)).toEqual([2e-6, 5e-6, 1e-5, 2e-5]);
    expect(logTicks(2.1e-6, 4.9e-6).length).toBeGreaterThanOrEqual(3);
    expect(logTicks(2.1e-6, 5.9e-6)).toEqual([3e-6, 4e-6, 5e-6]);
    expect(formatLogTick(1e-9)).toBe('10⁻⁹');
    expect(formatLogTick(2e-9)).toBe('2×10⁻⁹');
    expect(formatLogTick(0.01)).toBe('0.01');
  });
});

describe('display units', () => {
  // Each display scale against mathjs's own conversion of one SI unit into the display unit.
  const cases: [string, string, string, string][] = [
    ['m', '1 m', '1 nm', 'nm'],
    ['m^2', '1 m^2', '1 cm^2', 'cm²'],
    ['V/m', '1 V/m', '1 MV/cm', 'MV/cm'],
    ['m/V', '1 m/V', '1 cm/MV', 'cm/MV'],
    ['A/m^2', '1 A/m^2', '1 A/cm^2', 'A/cm²'],
    ['A/m^2/(V/m)^2', '(1 A/m^2) / (1 V/m)^2', '(1 A/cm^2) / (1 MV/cm)^2', '(A/cm²)/(MV/cm)²'],
    ['A/m^2/(V/m)', '(1 A/m^2) / (1 V/m)', '(1 A/cm^2) / (1 MV/cm)', '(A/cm²)/(MV/cm)'],
    ['A/(V/m)^2', '(1 A) / (1 V/m)^2', '(1 A) / (1 MV/cm)^2', 'A/(MV/cm)²'],
    ['A/m^2/K^2', '(1 A/m^2) / (1 K)^2', '(1 A/cm^2) / (1 K)^2', '(A/cm²)/K²'],
    ['m^2/(V*s)', '1 m^2/(V*s)', '1 cm^2/(V*s)', 'cm²/(V·s)'],
    ['S/m', '1 S/m', '1 S/cm', 'S/cm'],
    ['C/m^2', '1 C/m^2', '1 C/cm^2', 'C/cm²'],
    ['A/(m^2*K^2)', '1 A/(m^2*K^2)', '1 A/(cm^2*K^2)', 'A/(cm²·K²)'],
  ];
  for (const [si, siExpr, shownExpr, shown] of cases) {
    it(`${si} is shown in ${shown}`, () => {
      const d = displayUnit(si);
      expect(d.unit).toBe(shown);
      // How many display units one SI unit is, by mathjs: (1 SI) / (1 display) is a pure number.
      const ratio = Number(evaluate(`(${siExpr}) / (${shownExpr})`));
      expect(d.scale / ratio).toBeCloseTo(1, 12);
    });
  }
  it('√E in (MV/cm)^½: the square root of the field scale', () => {
    expect(displayUnit('(V/m)^0.5').scale).toBeCloseTo(Math.sqrt(unit(1, 'V/m').toNumber('MV/cm')), 15);
  });
  it('dimensionless values carry no unit; others are prettified as written', () => {
    expect(formatParameterText({ value: 2.131, stdErr: 0.04, unit: '1' })).toBe('2.131 ± 0.040');
    expect(prettyUnit('ohm')).toBe('Ω');
    expect(displayUnit('eV').unit).toBe('eV');
    expect(displayUnit('1/K').unit).toBe('1/K');
  });
  it('parameters and inputs in the trade units', () => {
    expect(formatParameterText({ value: 1.2e-9, stdErr: 0.05e-9, unit: 'm' })).toBe('1.200 ± 0.050 nm');
    expect(formatParameterText({ value: 3.4e-8, stdErr: 0.2e-8, unit: 'm^2/(V*s)' })).toBe('(3.40 ± 0.20)e-4 cm²/(V·s)');
    expect(formatParameterText({ value: 352, stdErr: 4, unit: 'A/m^2' }, 'jsc')).toBe('35.20 ± 0.40 mA/cm²');
    expect(formatParameterText({ value: 0.1873, stdErr: 0.0012, unit: '' }, 'efficiency')).toBe('18.73 ± 0.12 %');
    expect(formatInputs({ thickness: 7e-9, area: 1e-8, temperature: { value: 300, assumed: true } })).toBe(
      'thickness 7 nm, area 1e-4 cm², temperature 300 K (assumed)',
    );
    expect(fromDisplay(toDisplay(7e-9, INPUTS.thickness.si), INPUTS.thickness.si)).toBeCloseTo(7e-9, 20);
    expect(axisLabel({ label: '1/E', unit: 'm/V' })).toBe('1/E (cm/MV)');
    expect(axisLabel({ label: 'x', unit: '' })).toBe('x');
  });
});

describe('breakdown-test figures', () => {
  it("carry the SI unit of their device-results.csv column and show in the trade's units", () => {
    for (const [key, f] of Object.entries(RESULT_FIGURES)) {
      expect(RESULT_COLUMNS.find((c) => c.key === key)?.unit, key).toBe(f.si);
    }
    // E_bd in MV/cm and Q_bd in C/cm² (common practice), checked by mathjs above for the scales.
    expect(formatParameterText({ value: 1.3e9, unit: RESULT_FIGURES.breakdownField.si })).toBe('13 MV/cm');
    expect(formatParameterText({ value: 13882.85, stdErr: 755.6, unit: RESULT_FIGURES.chargeToBreakdown.si })).toBe('1.388 ± 0.076 C/cm²');
  });
});

describe('formatMeasurement on noise-free data', () => {
  it('an uncertainty below ten significant digits of the value is written on its own', () => {
    expect(formatMeasurement(3.200000000000001, 4.9e-15)).toBe('3.2 ± 4.9e-15');
  });
});

describe('log-axis labels', () => {
  it('one style per axis: powers of ten as soon as one tick needs them', () => {
    expect(formatLogTicks([1e-10, 1e-6, 1e-2])).toEqual(['10⁻¹⁰', '10⁻⁶', '10⁻²']);
    expect(formatLogTicks([0.01, 0.1, 1, 10])).toEqual(['0.01', '0.1', '1', '10']);
    expect(formatLogTicks([2e-6, 5e-6, 1e-5])).toEqual(['2×10⁻⁶', '5×10⁻⁶', '10⁻⁵']);
  });
});
