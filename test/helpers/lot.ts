/** Session folders of an invented lot for the lot and weibull tests: journal events plus results. */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { JournalWriter } from '../../daemon/journal/journal.js';
import { DEVICE_RESULTS_FILE, formatDeviceResults, type DeviceIdentity, type DeviceResult } from '../../protocols/device-results.js';

export interface FakeDevice {
  readonly label: string;
  readonly device?: DeviceIdentity;
  /** Final fits per sweep: parameter values (eV etc.) with their standard errors. */
  readonly fits?: readonly { readonly params: Record<string, [number, number, string]>; readonly plausible?: boolean; readonly complete?: boolean }[];
  readonly results?: readonly DeviceResult[];
  readonly cautions?: readonly { kind: 'breakdown-confirmed' | 'compliance' | 'drift-limit'; message: string }[];
}

export function writeSession(dataDir: string, d: FakeDevice): string {
  const { writer, id } = JournalWriter.create(dataDir, d.label);
  writer.event({
    type: 'session',
    id,
    startedAt: '2026-12-01T10:00:00.000Z',
    source: { kind: 'simulator', detail: 'test', control: true },
    instrument: 'test',
    plan: null,
    analysis: { model: 'fowler-nordheim', window: 'auto', inputs: { thickness: 7e-9, area: 1e-8 } },
    drift: null,
    limits: null,
    ...(d.device ? { device: d.device } : {}),
  } as never);
  (d.fits ?? []).forEach((f, k) => {
    const sweep = k + 1;
    writer.event({ type: 'sweep-start', sweep, planned: 10, label: '' });
    writer.event({ type: 'sweep-end', sweep, points: 10, complete: f.complete ?? true });
    writer.event({
      type: 'fit',
      sweep,
      final: true,
      fit: {
        model: 'fowler-nordheim',
        title: 'FN',
        window: { from: 5, to: 9, mode: 'auto' },
        line: { slope: -1, slopeStdErr: 0.01, intercept: 1, interceptStdErr: 0.1, r2: 0.999, residualStdDev: 0.01, n: 10 },
        axes: { x: { label: '1/E', unit: 'm/V', kind: 'linear' }, y: { label: 'J/E²', unit: '', kind: 'log' } },
        parameters: Object.fromEntries(Object.entries(f.params).map(([k2, [value, stdErr, unit]]) => [k2, { value, stdErr, unit }])),
        plausible: f.plausible ?? true,
        warnings: [],
        points: { used: 10, excluded: 0, reasons: {} },
        regimes: [],
      },
    });
  });
  for (const c of d.cautions ?? []) writer.event({ type: 'caution', kind: c.kind, message: c.message });
  writer.event({ type: 'run-end', outcome: 'completed', reason: 'plan finished', sweeps: d.fits?.length ?? 0 });
  writer.close();
  const dir = join(dataDir, id);
  if (d.results) writeFileSync(join(dir, DEVICE_RESULTS_FILE), formatDeviceResults(d.results));
  return dir;
}
