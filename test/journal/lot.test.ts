/**
 * The per-device results format, the lot reader and its cache, and the lot report, on invented
 * session folders.
 */
import { spawn, spawnSync } from 'node:child_process';
import { appendFileSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyzeWeibull } from '../../daemon/analysis/weibull.js';
import { JournalWriter, LOCK_FILE } from '../../daemon/journal/journal.js';
import { breakdownSample, expandSessionPaths, FolderLot, lotResults, readSummary, selectTest, SUMMARY_FILE } from '../../daemon/journal/lot.js';
import { analyzeLot, renderLot } from '../../daemon/journal/lot-report.js';
import { scanJournal } from '../../daemon/journal/reader.js';
import { DEVICE_RESULTS_FILE, formatDeviceResults, parseDeviceResults, RESULT_QUANTITIES, type DeviceResult } from '../../protocols/device-results.js';
import { scipyPython } from '../helpers/scipy.js';
import { writeSession } from '../helpers/lot.js';

const tmp = () => mkdtempSync(join(tmpdir(), 'plumbline-lot-'));

const ROWS: DeviceResult[] = [
  {
    device: 'D1',
    wafer: 'W07',
    site: 'C3',
    x: 0,
    y: 0,
    test: 'voltage-ramp',
    outcome: 'breakdown',
    criterion: 'current-jump',
    breakdownVoltage: 8.05,
    breakdownField: 1.15e9,
    chargeToBreakdown: 0.41,
    area: 1e-8,
    thickness: 7e-9,
    temperature: 298.15,
    leakageBefore: 1.2e-12,
    leakageAfter: 3.4e-11,
    tags: ['lot A', 'edge'],
  },
  {
    device: 'D2, "spare"',
    test: 'voltage-ramp',
    polarity: 'negative',
    outcome: 'survived',
    criterion: 'max-voltage',
    breakdownVoltage: 9,
    breakdownField: 9 / 7e-9,
  },
  { device: 'D3', test: 'voltage-ramp', outcome: 'initial-failure' },
];

describe('per-device results file', () => {
  it('round-trips with full precision, a units row and quoting', () => {
    const text = formatDeviceResults(ROWS);
    const lines = text.split('\n');
    expect(lines[0].split(',')).toContain('breakdown_field');
    expect(lines[1]).toBe(',,,,,,,,,V,V/m,C/m^2,C/m^2,s,m^2,m,K,A,A,A,');
    expect(parseDeviceResults(text, 'r.csv')).toEqual(ROWS);
  });

  it("reads as plain CSV outside our code (python's csv module): header, units row, one row per device", () => {
    const dir = tmp();
    const f = join(dir, DEVICE_RESULTS_FILE);
    writeFileSync(f, formatDeviceResults(ROWS));
    const r = spawnSync(
      scipyPython(),
      ['-c', 'import csv,sys,json; rows=list(csv.DictReader(open(sys.argv[1]))); print(json.dumps([rows[0], rows[1], rows[2]["outcome"], len(rows)]))', f],
      { encoding: 'utf8' },
    );
    const [units, first, outcome3, n] = JSON.parse(r.stdout);
    expect(units.breakdown_field).toBe('V/m');
    expect(Number(first.breakdown_field)).toBe(1.15e9);
    expect(first.tags).toBe('lot A;edge');
    expect(outcome3).toBe('survived');
    expect(n).toBe(4);
  });

  it('bad files are named by file, line and column; other units are refused, not misread', () => {
    const base = formatDeviceResults(ROWS.slice(0, 1)).split('\n');
    expect(() => parseDeviceResults([base[0], base[1].replace('V/m', 'MV/cm'), base[2]].join('\n'), 'r.csv')).toThrow(
      /r\.csv, line 2, column 'breakdown_field': unit 'MV\/cm'/,
    );
    expect(() => parseDeviceResults([base[0], base[1], base[2].replace('breakdown,', 'exploded,')].join('\n'), 'r.csv')).toThrow(
      /line 3, column 'outcome': 'exploded'/,
    );
    expect(() => parseDeviceResults([base[0], base[1], base[2].replace('8.05', '8,05')].join('\n'), 'r.csv')).toThrow(/line 3: expected 21 fields/);
    expect(() => parseDeviceResults('wafer,site\nW1,A1\n', 'r.csv')).toThrow(/no 'device' column/);
  });
});

describe('lot reader and cache', () => {
  it('a session whose only plausible fit is of a sweep that ended early (a ramp to breakdown) takes it', () => {
    const data = tmp();
    const dir = writeSession(data, {
      label: 'ramp',
      device: { device: 'R1', wafer: 'W07', site: 'C1' },
      fits: [
        { params: { barrierHeight: [0.4, 0.3, 'eV'] }, plausible: false },
        { params: { barrierHeight: [3.08, 0.02, 'eV'] }, complete: false },
      ],
    });
    const s = readSummary(dir, { cache: false }).summary;
    expect(s.fitSweep).toBe(2);
    expect(s.parameters.barrierHeight.value).toBe(3.08);
  });

  it("summarises a session: identity (edited later by an annotation), the first plausible complete sweep's fit, cautions, results", () => {
    const data = tmp();
    const dir = writeSession(data, {
      label: 'd1',
      device: { device: 'D1', wafer: 'W07', site: 'B2', x: 1, y: 2, tags: ['lot A'] },
      fits: [
        { params: { barrierHeight: [2.0, 0.2, 'eV'] }, complete: false },
        { params: { barrierHeight: [0.3, 0.1, 'eV'] }, plausible: false },
        { params: { barrierHeight: [3.12, 0.01, 'eV'] } },
        { params: { barrierHeight: [3.2, 0.01, 'eV'] } },
      ],
      cautions: [
        { kind: 'compliance', message: 'at compliance' },
        { kind: 'compliance', message: 'again' },
      ],
      results: ROWS.slice(0, 1),
    });
    const s1 = readSummary(dir);
    expect(s1.cached).toBe(false);
    expect(s1.summary.identity).toMatchObject({ device: 'D1', wafer: 'W07', site: 'B2', x: 1, y: 2, thickness: 7e-9, area: 1e-8 });
    expect(s1.summary.fitSweep).toBe(3);
    expect(s1.summary.parameters.barrierHeight.value).toBe(3.12);
    expect(s1.summary.cautions).toEqual([{ kind: 'compliance', count: 2, message: 'at compliance' }]);
    expect(s1.summary.results).toHaveLength(1);
    expect(readSummary(dir).cached).toBe(true);
    // An annotation moves the device to another site: the journal changed, the cache is rebuilt.
    const scan = scanJournal(dir, () => undefined);
    const w = JournalWriter.append(dir, scan.lastSeq, scan.lastT);
    w.event({ type: 'annotation', text: 'probe card map corrected', tags: ['device'], source: 'test', device: { site: 'B3', x: 1, y: 3 } } as never);
    w.close();
    const s2 = readSummary(dir);
    expect(s2.cached).toBe(false);
    expect(s2.summary.identity).toMatchObject({ site: 'B3', x: 1, y: 3, wafer: 'W07' });
    // The session's edit reaches the results row (a one-device session).
    expect(lotResults([s2.summary])[0]).toMatchObject({ site: 'B3', x: 1, y: 3, device: 'D1' });
    // A changed results file also rebuilds.
    expect(readSummary(dir).cached).toBe(true);
    appendFileSync(join(dir, DEVICE_RESULTS_FILE), 'D9,,,,,,,survived,,,1.3e9,,,,,,,,,,\n');
    const s3 = readSummary(dir);
    expect(s3.cached).toBe(false);
    expect(s3.summary.results).toHaveLength(2);
    // --no-cache reads the journal again.
    expect(readSummary(dir, { cache: false }).cached).toBe(false);
  });

  it('a session a live process still writes is summarised but not cached; a damaged cache is rebuilt', async () => {
    const data = tmp();
    const dir = writeSession(data, { label: 'live', fits: [{ params: { barrierHeight: [3.1, 0.01, 'eV'] } }] });
    const child = spawn('sleep', ['30']);
    try {
      writeFileSync(join(dir, LOCK_FILE), `${child.pid}\n`);
      expect(readSummary(dir).cached).toBe(false);
      expect(readSummary(dir).cached).toBe(false);
    } finally {
      child.kill();
    }
    await new Promise((r) => child.once('exit', r));
    expect(readSummary(dir).cached).toBe(false);
    expect(readSummary(dir).cached).toBe(true);
    writeFileSync(join(dir, SUMMARY_FILE), '{"format": 1, "stamp": ');
    expect(readSummary(dir).cached).toBe(false);
    expect(JSON.parse(readFileSync(join(dir, SUMMARY_FILE), 'utf8')).summary.parameters.barrierHeight.value).toBe(3.1);
  });

  it('takes session folders or data folders; a wrong path is named', async () => {
    const data = tmp();
    const a = writeSession(data, { label: 'a' });
    writeSession(data, { label: 'b' });
    expect(expandSessionPaths([data])).toHaveLength(2);
    expect(expandSessionPaths([data, a])).toHaveLength(2);
    expect(() => expandSessionPaths([join(data, 'nope')])).toThrow(/nope: the folder does not exist; check the path/);
    expect(() => expandSessionPaths([tmp()])).toThrow(/neither a session folder/);
    const lot = new FolderLot([data]);
    expect(await lot.devices()).toHaveLength(2);
    expect(lot.cachedCount).toBe(0);
    await lot.devices();
    expect(lot.cachedCount).toBe(2);
  });

  it('the Weibull sample: breakdowns fail, survivors are censored, initial failures and missing values are left out and counted, areas become factors', () => {
    const rows: DeviceResult[] = [
      ...[1.1e9, 1.2e9, 1.25e9].map((v, k) => ({ device: `a${k}`, test: 'voltage-ramp', outcome: 'breakdown' as const, breakdownField: v, area: 1e-8 })),
      { device: 'big', test: 'voltage-ramp', outcome: 'breakdown', breakdownField: 1.0e9, area: 4e-8 },
      { device: 's', test: 'voltage-ramp', outcome: 'survived', breakdownField: 1.3e9, area: 1e-8 },
      { device: 'i', test: 'voltage-ramp', outcome: 'initial-failure', area: 1e-8 },
      { device: 'm', test: 'voltage-ramp', outcome: 'breakdown', area: 1e-8 },
    ];
    const s = breakdownSample(rows, RESULT_QUANTITIES.field);
    expect(s.values).toEqual([1.1e9, 1.2e9, 1.25e9, 1.0e9, 1.3e9]);
    expect(s.censored).toEqual([false, false, false, false, true]);
    expect(s.area).toBe(1e-8);
    expect(s.areaFactor).toEqual([1, 1, 1, 4, 1]);
    expect(s.notes.join(' ')).toMatch(/1 initial failure/);
    expect(s.notes.join(' ')).toMatch(/1 device\(s\) without a breakdown field/);
    const ref = breakdownSample(rows, RESULT_QUANTITIES.field, 4e-8);
    expect(ref.areaFactor).toEqual([0.25, 0.25, 0.25, 1, 0.25]);
    expect(s.warnings).toEqual([]);
    // A device breaks down once: the same identity twice is counted again or misnamed, and said so.
    const twice = breakdownSample([...rows, { ...rows[0] }, { ...rows[0], wafer: 'W2' }], RESULT_QUANTITIES.field);
    expect(twice.values.length).toBe(7);
    expect(twice.warnings?.join(' ')).toMatch(/1 device identity appears in more than one result \(a0 ×2\): a device breaks down once/);
  });
});

describe('lot report', () => {
  it('a device that survived its ramp: its value is a lower bound, shown as "> value", not a breakdown and never an outlier', async () => {
    // A survivor reached its value without breaking down: the value bounds its breakdown value from
    // below (right-censored data, IEC 61649), so it is no draw of the breakdown distribution.
    const data = mkdtempSync(join(tmpdir(), 'plumbline-lot-surv-'));
    const fields = [1.12e9, 1.18e9, 1.15e9, 1.2e9, 1.09e9, 1.16e9, 1.22e9, 1.14e9];
    fields.forEach((f, k) =>
      writeSession(data, {
        label: `b${k}`,
        device: { device: `D${k}`, wafer: 'W1', site: `S${k}`, x: k % 3, y: Math.floor(k / 3) },
        results: [{ device: `D${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownField: f, breakdownVoltage: f * 7e-9 }],
      }),
    );
    // A ramp stopped at 2 V (2.86 MV/cm) on purpose: the device held.
    writeSession(data, {
      label: 'held',
      device: { device: 'H1', wafer: 'W1', site: 'S9', x: 2, y: 2 },
      results: [{ device: 'H1', test: 'voltage-ramp', outcome: 'survived', breakdownField: 2 / 7e-9, breakdownVoltage: 2 }],
    });
    const a = await analyzeLot(new FolderLot([data]));
    const field = a.parameters.find((p) => p.name === 'breakdown field');
    expect(field?.n).toBe(8);
    expect(field?.survivors).toBe(1);
    expect(field?.outliers).toEqual([]);
    expect(field?.box?.median).toBeCloseTo(1.155e9, -3);
    expect(a.weibull?.censored).toBe(1);
    const html = renderLot(a, { map: 'field' });
    expect(html).toMatch(/&gt; 2\.8571/);
    expect(html).toMatch(/1 survivor left out: their values are lower bounds/);
    expect(html).toMatch(/survived, beyond 2\.857 MV\/cm/);
    expect(html).not.toMatch(/◇ outlier<\/td>/);
  });

  it('flags the outlier site, maps every site, fits the breakdown fields and shows them', async () => {
    const data = tmp();
    const barriers = [3.11, 3.13, 3.12, 3.1, 3.14, 3.12, 3.13, 2.6, 3.11];
    const fields = [1.12e9, 1.18e9, 1.15e9, 1.2e9, 1.09e9, 1.16e9, 1.22e9, 0.55e9, 1.14e9];
    barriers.forEach((b, k) =>
      writeSession(data, {
        label: `site${k}`,
        device: { device: `D${k}`, wafer: k < 5 ? 'W07' : 'W08', site: `S${k}`, x: k % 3, y: Math.floor(k / 3), area: 1e-8, thickness: 7e-9 },
        fits: [{ params: { barrierHeight: [b, 0.01, 'eV'] } }],
        results: [
          { device: `D${k}`, test: 'voltage-ramp', outcome: k === 4 ? 'survived' : 'breakdown', breakdownField: fields[k], breakdownVoltage: fields[k] * 7e-9 },
        ],
        cautions: k !== 4 ? [{ kind: 'breakdown-confirmed', message: 'breakdown confirmed; output turned off' }] : [],
      }),
    );
    const a = await analyzeLot(new FolderLot([data]));
    expect(a.rows).toHaveLength(9);
    const bh = a.parameters.find((p) => p.name === 'barrierHeight');
    expect(bh?.outliers.map((o) => o.device)).toEqual(['D7']);
    expect(a.parameters.find((p) => p.name === 'breakdown field')?.outliers.map((o) => o.device)).toEqual(['D7']);
    expect(a.cautions).toEqual([{ kind: 'breakdown-confirmed', count: 8, sessions: 8, message: 'breakdown confirmed; output turned off' }]);
    const direct = analyzeWeibull({ values: fields, censored: fields.map((_, k) => k === 4) }, { unit: 'V/m', area: 1e-8 });
    expect(a.weibull?.shape.value).toBeCloseTo(direct.shape.value, 12);
    expect(a.weibull?.censored).toBe(1);
    const html = renderLot(a, { map: 'barrierHeight' });
    // Every site on the wafer maps (two wafers), the outlier marked, the values in the trade's units.
    expect(html.match(/<rect class="site"/g)).toHaveLength(9);
    expect(html).toContain('wafer W07');
    expect(html).toContain('wafer W08');
    expect(html).toMatch(/2\.6 ± 0\.01 ◇ outlier/);
    // The colour scale spans the other sites (3.1–3.14 eV), not the outlier's 2.6 eV, and says so.
    expect(html).toMatch(/<text x="10" y="34">3\.1<\/text><text x="310" y="34" text-anchor="end">3\.14 eV<\/text>/);
    expect(html).toMatch(/the colour scale spans the other sites/);
    expect(html).toContain(`${+direct.shape.value.toPrecision(4)} (90 %`);
    expect(html).toMatch(/breakdown field \(MV\/cm\)/);
    expect(html).toContain('11.5'); // 1.15e9 V/m = 11.5 MV/cm in the table
    // The Weibull plot: one marker per breakdown (the survivor is not plotted).
    expect(html.match(/<circle class="device"/g)).toHaveLength(8);
    expect(html).not.toMatch(/<script/);
    expect(html).not.toMatch(/several devices share/);
    // Two devices given one position: the map says so (one square would hide the other).
    writeSession(data, {
      label: 'site9',
      device: { device: 'D9', wafer: 'W07', site: 'S9', x: 0, y: 0, area: 1e-8, thickness: 7e-9 },
      fits: [{ params: { barrierHeight: [3.12, 0.01, 'eV'] } }],
    });
    const again = renderLot(await analyzeLot(new FolderLot([data])), { map: 'barrierHeight' });
    expect(again).toMatch(/several devices share — 2 devices at \(0, 0\) on wafer W07: D[09], D[09]/);
  });

  it("breakdown voltages tied on a ramp's 0.1 V levels: neighbours one step away are not outliers, a far one is", async () => {
    // Twelve of sixteen devices broke down on the same level: the MAD is 0, so without the grid
    // every other device would be "infinitely" far (Iglewicz & Hoaglin's M divides by the MAD).
    const data = tmp();
    const volts = [...Array(12).fill(8.1), 8.0, 8.2, 8.200000000000001, 5.3];
    volts.forEach((v, k) =>
      writeSession(data, { label: `g${k}`, results: [{ device: `G${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownVoltage: v }] }),
    );
    const a = await analyzeLot(new FolderLot([data]), { quantity: 'voltage' });
    const p = a.parameters.find((q) => q.name === 'breakdown voltage');
    expect(p?.resolution).toBeCloseTo(0.1, 9);
    expect(p?.outliers.map((o) => o.device)).toEqual(['G15']);
    expect(renderLot(a, {})).toMatch(/values sit on a grid of 0\.1 V \(ties\)/);
  });

  it('a narrow lot (β = 40) still gets a labelled Weibull axis and distribution axes with distinct round ticks', async () => {
    const data = tmp();
    // Fields 11.6 … 12.4 MV/cm (bounds reach about 10 … 13): a single 1-2-5 log tick falls inside.
    const fields = Array.from({ length: 12 }, (_, k) => 1.16e9 + k * 0.0075e9);
    fields.forEach((f, k) =>
      writeSession(data, { label: `n${k}`, results: [{ device: `N${k}`, test: 'voltage-ramp', outcome: 'breakdown', breakdownField: f }] }),
    );
    const html = renderLot(await analyzeLot(new FolderLot([data])), {});
    const weibull = html.slice(html.indexOf('aria-label="Weibull plot"'));
    const xLabels = [...weibull.matchAll(/<line class="xtick"[^>]*\/><text[^>]*>([^<]+)<\/text>/g)].map((m) => m[1]);
    expect(xLabels.length).toBeGreaterThanOrEqual(3);
    expect(new Set(xLabels).size).toBe(xLabels.length);
    for (const l of xLabels) expect(Number(l)).toBeGreaterThan(9);
    const strip = [...html.matchAll(/<text class="xtick"[^>]*>([^<]+)<\/text>/g)].map((m) => m[1]);
    expect(strip.length).toBeGreaterThanOrEqual(3);
    expect(new Set(strip).size).toBe(strip.length);
  });
});

describe('results of the two polarities are not pooled unasked', () => {
  const mk = (device: string, polarity?: 'positive' | 'negative'): DeviceResult => ({
    device,
    test: 'voltage-ramp',
    outcome: 'breakdown',
    ...(polarity ? { polarity } : {}),
  });
  const rows = [mk('P1', 'positive'), mk('P2', 'positive'), mk('N1', 'negative'), mk('U1')];
  it('both polarities: refused with the choices; KIND/POLARITY picks one (rows of unknown polarity go with either); all pools', () => {
    expect(() => selectTest(rows, undefined)).toThrow(
      /voltage-ramp results hold both polarities: positive \(2\), negative \(1\); choose one with --test voltage-ramp\/positive/,
    );
    expect(() => selectTest(rows, 'voltage-ramp')).toThrow(/both polarities/);
    expect(selectTest(rows, 'voltage-ramp/positive').map((r) => r.device)).toEqual(['P1', 'P2', 'U1']);
    expect(selectTest(rows, 'voltage-ramp/negative').map((r) => r.device)).toEqual(['N1', 'U1']);
    expect(selectTest(rows, 'all')).toHaveLength(4);
    expect(() => selectTest(rows, 'voltage-ramp/sideways')).toThrow(/positive or negative/);
    // One polarity (and unknowns): nothing to choose.
    expect(selectTest([mk('P1', 'positive'), mk('U1')], undefined)).toHaveLength(2);
    // A polarity cell that is neither is refused with its line.
    expect(() => parseDeviceResults('device,test,polarity,outcome\nD1,voltage-ramp,up,breakdown\n', 'r.csv')).toThrow(
      /r\.csv, line 2.*polarity.*'up': expected positive or negative/,
    );
  });
});

describe('a corrected identity corrects the figures derived from it', () => {
  it('a thickness or area corrected by an annotation rescales E_bd = (V − V_FB)/d and Q_bd = ∫I dt/A in the lot', () => {
    const data = tmp();
    // The test ran with the thickness given as 70 nm and the area as 1e-7 m² by mistake.
    const wrong: DeviceResult = { ...ROWS[0], thickness: 7e-8, area: 1e-7, breakdownField: 8.05 / 7e-8, chargeToBreakdown: 0.041 };
    const dir = writeSession(data, { label: 'd1', device: { device: 'D1', thickness: 7e-8, area: 1e-7 }, fits: [], results: [wrong] });
    expect(lotResults([readSummary(dir).summary])[0].breakdownField).toBeCloseTo(8.05 / 7e-8, 0);
    const scan = scanJournal(dir, () => undefined);
    const w = JournalWriter.append(dir, scan.lastSeq, scan.lastT);
    w.event({
      type: 'annotation',
      text: 'thickness and area from the process sheet',
      tags: ['device'],
      source: 'test',
      device: { thickness: 7e-9, area: 1e-8 },
    } as never);
    w.close();
    const r = lotResults([readSummary(dir).summary])[0];
    expect(r.thickness).toBe(7e-9);
    expect(r.breakdownField as number).toBeCloseTo(8.05 / 7e-9, 0);
    expect(r.chargeToBreakdown as number).toBeCloseTo(0.41, 12);
    // Unchanged where nothing was corrected: the voltage and the time.
    expect(r.breakdownVoltage).toBe(8.05);
  });
});
