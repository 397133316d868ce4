/**
 * `plumbline archive` and `plumbline lab`: the lab beyond one station. Stations publish their
 * journals to an MQTT broker (serve|run|watch --publish); `archive` writes them into PostgreSQL,
 * or loads session folders directly (--import); `lab` serves one page with every station's state.
 * Modules (mqtt, pg, express) load only when these commands run.
 */
import type { Command } from 'commander';
import type { LotSource } from '../journal/lot.js';
import { UsageError } from './usage.js';

export interface ArchiveSelectionOptions {
  postgres?: string;
  wafer?: string;
  site?: string;
  tag?: string;
  from?: string;
  to?: string;
  station?: string;
}

/** The options that read devices from the archive instead of folders (weibull, lot). */
export function withArchiveSelection(cmd: Command): Command {
  return cmd
    .option('--postgres <url>', 'read the devices from the archive (plumbline archive) instead of folders, selected by the options below')
    .option('--wafer <name>', 'with --postgres: sessions of this wafer')
    .option('--site <name>', 'with --postgres: sessions of this site')
    .option('--tag <tag>', 'with --postgres: sessions whose device, or one of whose notes, carries this tag')
    .option('--from <date>', 'with --postgres: sessions started at or after this date/time (ISO 8601)')
    .option('--to <date>', 'with --postgres: sessions started before this date/time')
    .option('--station <id>', 'with --postgres: sessions of this station');
}

/**
 * The archive selection as a lot, or undefined when --postgres is not given (then folders are read,
 * and a selection option alone is a usage error).
 */
export async function archiveLot(o: ArchiveSelectionOptions, inputs: readonly string[]): Promise<LotSource | undefined> {
  const given = (['wafer', 'site', 'tag', 'from', 'to', 'station'] as const).filter((k) => o[k] !== undefined);
  if (o.postgres === undefined) {
    if (given.length > 0) throw new UsageError(`--${given[0]} selects sessions in the archive: give --postgres URL too`);
    if (inputs.length === 0) throw new UsageError('give session folders (or data folders), or --postgres URL with a selection');
    return undefined;
  }
  if (inputs.length > 0) throw new UsageError('give folders or --postgres, not both');
  const { ArchiveLot } = await import('../lab/archive-lot.js');
  return new ArchiveLot(o.postgres, { wafer: o.wafer, site: o.site, tag: o.tag, from: o.from, to: o.to, station: o.station });
}

export interface ArchiveSessionOptions extends ArchiveSelectionOptions {
  session?: string;
  into?: string;
}

/**
 * The options that read sessions from the archive instead of a folder (export, report, refit):
 * the selected sessions are written back as session folders under --into and read from there.
 * `selection` adds the wafer/site/tag/date options (export); the others take one session.
 */
export function withArchiveSessions(cmd: Command, selection: boolean): Command {
  cmd
    .option('--postgres <url>', 'read the session(s) from the archive (plumbline archive) instead of a folder')
    .option('--session <name>', "with --postgres: the session's name (its folder's name on the station)")
    .option('--station <id>', 'with --postgres: the station it came from (when two stations have sessions of that name)')
    .option('--into <dir>', 'with --postgres: where the archived sessions are written as folders (default ./plumbline-archive-sessions)');
  if (selection) {
    cmd
      .option('--wafer <name>', 'with --postgres: sessions of this wafer')
      .option('--site <name>', 'with --postgres: sessions of this site')
      .option('--tag <tag>', 'with --postgres: sessions whose device, or one of whose notes, carries this tag')
      .option('--from <date>', 'with --postgres: sessions started at or after this date/time (ISO 8601)')
      .option('--to <date>', 'with --postgres: sessions started before this date/time');
  }
  return cmd;
}

/** The session folders a command works on: the one given, or the archived ones written out. */
export async function sessionDirs(dir: string | undefined, o: ArchiveSessionOptions, one: boolean): Promise<string[]> {
  const { resolve } = await import('node:path');
  const given = (['session', 'station', 'into', 'wafer', 'site', 'tag'] as const).filter((k) => o[k] !== undefined);
  if (o.postgres === undefined) {
    if (given.length > 0) throw new UsageError(`--${given[0]} reads from the archive: give --postgres URL too`);
    if (dir === undefined) throw new UsageError('give a session folder, or --postgres URL with --session NAME');
    const { statSync } = await import('node:fs');
    const st = statSync(resolve(dir), { throwIfNoEntry: false });
    if (st?.isFile())
      throw new UsageError(
        `${dir} is a file, not a session folder (a folder holding journal.jsonl, e.g. plumbline-data/<session>); to analyse a CSV use plumbline fit or rank`,
      );
    return [resolve(dir)];
  }
  if (dir !== undefined) throw new UsageError('give a session folder or --postgres, not both');
  if (one && o.session === undefined) throw new UsageError('with --postgres, name the session: --session NAME');
  const { materializeSessions } = await import('../lab/archive-sessions.js');
  const out = await materializeSessions(
    o.postgres,
    { session: o.session, station: o.station, wafer: o.wafer, site: o.site, tag: o.tag, from: o.from, to: o.to },
    resolve(o.into ?? 'plumbline-archive-sessions'),
  );
  if (out.length === 0) throw new UsageError(`the archive has no session${o.session ? ` named '${o.session}'` : ' matching the selection'}`);
  if (one && out.length > 1)
    throw new UsageError(`the archive has ${out.length} sessions named '${o.session}' (from ${out.map((x) => x.station).join(', ')}): give --station`);
  for (const m of out) process.stderr.write(`from the archive: ${m.station}/${m.session} (${m.readings} readings, ${m.events} events) → ${m.dir}\n`);
  return out.map((m) => m.dir);
}

function percentile(xs: readonly number[], p: number): number {
  if (xs.length === 0) return Number.NaN;
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.floor(p * s.length))];
}

export function registerLab(program: Command): void {
  program
    .command('archive')
    .description("write every station's published sessions into PostgreSQL (persistent MQTT session, idempotent), or --import session folders")
    .requiredOption('--postgres <url>', 'database, e.g. postgres://user@host/db or postgres:///db?host=/run/postgresql (password: PGPASSWORD or in the URL)')
    .option('--mqtt <url>', 'broker the stations publish to: mqtt://HOST:PORT[/PREFIX] (credentials as user:password@ or PLUMBLINE_MQTT_USERNAME/PASSWORD)')
    .option('--client-id <id>', "MQTT client id of the archive's persistent session (one per archive)", 'plumbline-archive')
    .option('--import <dirs...>', 'load session folders (or data folders holding them) instead of subscribing')
    .option('--station <id>', 'with --import: the station id to file them under (default: host name and data folder name, as --publish uses)')
    .option('--json', 'with --import: print one JSON object')
    .action(async (o: { postgres: string; mqtt?: string; clientId: string; import?: string[]; station?: string; json?: boolean }) => {
      const log = (line: string) => process.stderr.write(`${line}\n`);
      if (o.import !== undefined) {
        if (o.mqtt !== undefined) throw new UsageError('--import loads folders directly; leave out --mqtt');
        const { expandSessionDirs, importSession } = await import('../lab/import.js');
        const { ArchiveStore } = await import('../lab/store.js');
        const dirs = expandSessionDirs(o.import);
        const store = await ArchiveStore.open(o.postgres, log);
        try {
          const results = [];
          for (const d of dirs) {
            const r = await importSession(store, d, o.station);
            results.push(r);
            if (!o.json) {
              process.stdout.write(
                `${r.station}/${r.session}: ${r.readings} readings (${r.readingsInserted} new), ${r.eventsInserted} new events, through seq ${r.lastSeq}${r.holes ? `, ${r.holes} damaged line(s) skipped` : ''}${r.live ? ' — still being written: import again later for the rest' : ''}\n`,
              );
            }
          }
          if (o.json) process.stdout.write(`${JSON.stringify({ sessions: results })}\n`);
        } finally {
          await store.close();
        }
        return;
      }
      if (o.mqtt === undefined) throw new UsageError('give --mqtt URL to archive what stations publish, or --import SESSION_DIR... to load folders');
      if (o.station !== undefined) throw new UsageError('--station applies to --import only');
      const { Archive } = await import('../lab/archive.js');
      const archive = new Archive({ mqtt: o.mqtt, postgres: o.postgres, clientId: o.clientId, log });
      await archive.start();
      process.stdout.write(`archiving ${archive.addr.display} into PostgreSQL; Ctrl-C stops\n`);
      let shown = -1;
      const report = setInterval(() => {
        const s = archive.stats;
        if (s.batches === shown) return;
        shown = s.batches;
        const lags = s.lags.slice(-2000);
        process.stdout.write(
          `archived ${s.readings} readings and ${s.events} events in ${s.batches} batches (${s.duplicates} already there); lag p50 ${percentile(lags, 0.5).toFixed(0)} ms, p99 ${percentile(lags, 0.99).toFixed(0)} ms\n`,
        );
      }, 10_000);
      const stop = async (why: string) => {
        clearInterval(report);
        process.stdout.write(`stopping: ${why}\n`);
        await archive.close();
        process.exit(0);
      };
      process.on('SIGINT', () => void stop('interrupted (SIGINT)'));
      process.on('SIGTERM', () => void stop('terminated (SIGTERM)'));
      await new Promise(() => undefined);
    });

  program
    .command('lab')
    .description(
      "one read-only page with every station publishing to the broker: state, device, progress, latest parameters, cautions; links to each station's page",
    )
    .requiredOption('--mqtt <url>', 'broker the stations publish to: mqtt://HOST:PORT[/PREFIX]')
    .option('--port <n>', 'HTTP port (0 = any free port)', '8480')
    .option('--host <addr>', 'address to listen on (anything beyond loopback needs --token)', '127.0.0.1')
    .option('--token <token>', 'required by the page (open it as /?token=…) when set; needed beyond loopback (or PLUMBLINE_LAB_TOKEN)')
    .action(async (o: { mqtt: string; port: string; host: string; token?: string }) => {
      const port = Number(o.port);
      if (!Number.isInteger(port) || port < 0 || port > 65535) throw new UsageError(`--port '${o.port}': expected a port number`);
      const { startLabServer } = await import('../lab/lab-server.js');
      const srv = await startLabServer({
        mqtt: o.mqtt,
        host: o.host,
        port,
        token: o.token ?? process.env.PLUMBLINE_LAB_TOKEN,
        log: (line) => process.stderr.write(`${line}\n`),
      });
      process.stdout.write(`plumbline lab\n  page  ${srv.url}\n`);
      const stop = async () => {
        await srv.close();
        process.exit(0);
      };
      process.on('SIGINT', () => void stop());
      process.on('SIGTERM', () => void stop());
      await new Promise(() => undefined);
    });
}
