/**
 * Device identity through a whole run: given on the command line, in a plan file or through the
 * API, journaled in the session event, exported, corrected afterwards by an annotation, and seen by
 * the lot reader. Runs the built command and daemon on the simulated instrument.
 */
import { readFileSync, readdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { readSummary } from '../../daemon/journal/lot.js';
import { runCli } from '../helpers/cli.js';
import { api, startDaemon, tempDir, type DaemonProcess } from '../helpers/daemon.js';

const sessionEvent = (dir: string) =>
  JSON.parse(
    readFileSync(join(dir, 'journal.jsonl'), 'utf8')
      .split('\n')
      .find((l) => l.includes('"type":"session"')) as string,
  );
const onlySession = (data: string) => join(data, readdirSync(data).filter((d) => !d.endsWith('.json'))[0]);

describe('device identity', () => {
  let daemon: DaemonProcess | undefined;
  afterAll(async () => daemon?.stop());

  it('run --wafer/--site/--x/--y/--area…: journaled, used by the live fit, exported; annotate corrects it; the lot sees the correction', () => {
    const data = tempDir();
    const r = runCli([
      'run',
      '--scenario',
      'oxide-fn',
      '--sweeps',
      '1',
      '--fast',
      '--data',
      data,
      '--device',
      'C4-cap',
      '--wafer',
      'W07',
      '--site',
      'C4',
      '--x',
      '3',
      '--y',
      '-2',
      '--area',
      '1e-4 cm^2',
      '--thickness',
      '7 nm',
      '--device-tag',
      'lot A',
      '--device-tag',
      'ramp',
    ]);
    expect(r.code, r.stderr).toBe(0);
    const dir = onlySession(data);
    const s = sessionEvent(dir);
    expect(s.device).toMatchObject({ device: 'C4-cap', wafer: 'W07', site: 'C4', x: 3, y: -2, tags: ['lot A', 'ramp'] });
    expect(s.device.area).toBeCloseTo(1e-8, 20);
    expect(s.device.thickness).toBeCloseTo(7e-9, 20);
    // The device's area and thickness are the live fit's inputs.
    expect(s.analysis.inputs.area).toBeCloseTo(1e-8, 20);
    expect(s.analysis.inputs.thickness).toBeCloseTo(7e-9, 20);
    const a = runCli(['annotate', dir, '--site', 'C5', '--y', '-1']);
    expect(a.code, a.stderr).toBe(0);
    const x = runCli(['export', dir, '--out', join(data, 'x')]);
    expect(x.code).toBe(0);
    const meta = JSON.parse(readFileSync(join(data, 'x', 'session.json'), 'utf8'));
    expect(meta.device).toMatchObject({ device: 'C4-cap', wafer: 'W07', site: 'C5', x: 3, y: -1 });
    expect(meta.sessionEvent.device.site).toBe('C4');
    expect(meta.annotations.at(-1).text).toMatch(/device identity corrected: site C5 · \(x –, y -1\)/);
    expect(readSummary(dir).summary.identity).toMatchObject({ site: 'C5', x: 3, y: -1, wafer: 'W07' });
  });

  it('a plan file carries the device; command-line options override its fields; bad values name the file or option', () => {
    const data = tempDir();
    const plan = join(data, 'plan.json');
    writeFileSync(
      plan,
      JSON.stringify({ kind: 'linear', start: 0, stop: 5, points: 11, compliance: 1e-3, device: { wafer: 'W09', site: 'A1', x: 1, y: 2, area: 1e-8 } }),
    );
    const r = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--data', data, '--plan', plan, '--site', 'A2']);
    expect(r.code, r.stderr).toBe(0);
    expect(sessionEvent(onlySession(data)).device).toEqual({ wafer: 'W09', site: 'A2', x: 1, y: 2, area: 1e-8 });
    writeFileSync(plan, JSON.stringify({ kind: 'linear', start: 0, stop: 5, points: 11, compliance: 1e-3, device: { wafer: 'W09', area: -3 } }));
    let b = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--data', data, '--plan', plan]);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/plan\.json: device\.area: expected a positive number in m\^2/);
    // A thickness in nanometres written as if it were SI (7 → 7 m): refused before anything is sent.
    writeFileSync(plan, JSON.stringify({ kind: 'linear', start: 0, stop: 5, points: 11, compliance: 1e-3, device: { thickness: 7 } }));
    b = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--data', data, '--plan', plan]);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/plan\.json: device\.thickness: 7 m is outside 0\.1 nm – 1 mm/);
    b = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--data', data, '--thickness', '7']);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/--thickness '7': a bare number is read in metres.*"7 nm"/);
    b = runCli(['run', '--scenario', 'oxide-fn', '--fast', '--data', data, '--x', 'left']);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/--x 'left': expected a number/);
    b = runCli(['annotate', onlySession(data)]);
    expect(b.code).toBe(2);
    expect(b.stderr).toMatch(/give --text/);
  });

  it('the API: POST /api/run {device} and POST /api/annotations {device}; a bad field is a 400 naming it', async () => {
    const data = tempDir();
    daemon = await startDaemon(['--scenario', 'oxide-fn', '--fast', '--data', data, '--no-autostart']);
    const bad = await api(daemon.url, 'POST', '/api/run', { device: { wafer: 'W1', colour: 'red' } });
    expect(bad.status).toBe(400);
    expect(JSON.stringify(bad.json)).toMatch(/device\.colour: unknown field/);
    const ok = await api(daemon.url, 'POST', '/api/run', {
      plan: { kind: 'linear', start: 0, stop: 9, points: 46, compliance: 1e-3 },
      device: { wafer: 'W1', site: 'B2', x: 0, y: 1 },
    });
    expect(ok.status).toBe(201);
    for (let k = 0; k < 200 && (await api(daemon.url, 'GET', '/api/status')).json.running; k++) await new Promise((r) => setTimeout(r, 50));
    const dir = join(data, ok.json.session);
    expect(sessionEvent(dir).device).toEqual({ wafer: 'W1', site: 'B2', x: 0, y: 1 });
    const n = await api(daemon.url, 'POST', '/api/annotations', { text: 'site map corrected', session: ok.json.session, device: { site: 'B3', y: 2 } });
    expect(n.status).toBe(201);
    expect(n.json.device).toEqual({ site: 'B3', y: 2 });
    const n2 = await api(daemon.url, 'POST', '/api/annotations', { text: 'x', session: ok.json.session, device: { area: 'big' } });
    expect(n2.status).toBe(400);
    expect(JSON.stringify(n2.json)).toMatch(/device\.area: expected a positive number/);
    expect(readSummary(dir).summary.identity).toMatchObject({ wafer: 'W1', site: 'B3', x: 0, y: 2 });
    // The lot view of the data folder, as the page's link opens it (and as JSON).
    const lot = await api(daemon.url, 'GET', '/api/lot?map=barrierHeight');
    expect(lot.status).toBe(200);
    expect(lot.json.rows).toHaveLength(1);
    expect(lot.json.rows[0]).toMatchObject({ wafer: 'W1', site: 'B3', x: 0, y: 2 });
    const html = await fetch(`${daemon.url}/lot?map=barrierHeight`).then((r) => r.text());
    expect(html).toContain('plumbline lot report');
    expect(html).toContain('Wafer map: barrierHeight');
    expect(html.match(/<rect class="site"/g)).toHaveLength(1);
    const page = await fetch(`${daemon.url}/`).then((r) => r.text());
    expect(page).toMatch(/id="lot-link" href="lot"/);
  });
});
