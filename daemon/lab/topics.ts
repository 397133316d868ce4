/**
 * Names on the broker, and the broker address as users write it.
 *
 * Topic tree (PREFIX defaults to `plumbline`):
 *   PREFIX/station/STATION/status                    retained, QoS 1: the station's state (StationStatus)
 *   PREFIX/station/STATION/session/SESSION/data      QoS 1: journal batches (readings and events, seq-contiguous)
 *   PREFIX/station/STATION/session/SESSION/events    QoS 1: the batch's events alone, as JSON (light subscribers)
 *   PREFIX/station/STATION/replay                    QoS 1: a subscriber asks the station to publish seq ranges again
 *
 * Station and session names are restricted to [A-Za-z0-9._-] so they never contain MQTT wildcards
 * or separators.
 */
import { hostname } from 'node:os';
import { basename } from 'node:path';

export class LabConfigError extends Error {
  readonly code = 'BAD_CONFIG';
}

export interface BrokerAddress {
  /** mqtt://host:port (or mqtts://), without credentials. */
  readonly server: string;
  readonly prefix: string;
  readonly username?: string;
  readonly password?: string;
  /** The address as it may be shown or stored: no password, ever. */
  readonly display: string;
}

const NAME = /^[A-Za-z0-9._-]{1,80}$/;

/** Checks a station or session name for use inside a topic. */
export function checkName(name: string, what: string): string {
  if (!NAME.test(name)) throw new LabConfigError(`${what} '${name}': use 1–80 letters, digits, '.', '_' or '-' (it becomes part of MQTT topic names)`);
  return name;
}

/**
 * Parses mqtt://[user[:password]@]HOST[:PORT][/PREFIX]. Credentials may also come from the
 * environment (PLUMBLINE_MQTT_USERNAME, PLUMBLINE_MQTT_PASSWORD) so they stay out of shell history.
 */
export function parseBrokerUrl(text: string, setting = '--mqtt', env: NodeJS.ProcessEnv = process.env): BrokerAddress {
  let u: URL;
  try {
    u = new URL(text);
  } catch {
    throw new LabConfigError(`${setting}: '${redactUrl(text)}' is not a URL; expected mqtt://HOST:PORT[/PREFIX]`);
  }
  if (u.protocol !== 'mqtt:' && u.protocol !== 'mqtts:') throw new LabConfigError(`${setting}: expected an mqtt:// or mqtts:// address, got '${u.protocol}'`);
  if (!u.hostname) throw new LabConfigError(`${setting}: the address has no host`);
  const port = u.port || (u.protocol === 'mqtts:' ? '8883' : '1883');
  if (/[#?+]/.test(text.replace(/^[a-z]+:\/\/[^/]*/i, ''))) throw new LabConfigError(`${setting}: the topic prefix may not contain '#', '+' or '?'`);
  const prefix = decodeURIComponent(u.pathname.replace(/^\/+|\/+$/g, '')) || 'plumbline';
  if (/[#+]/.test(prefix) || prefix.split('/').some((p) => p === ''))
    throw new LabConfigError(`${setting}: topic prefix '${prefix}' may not contain '#', '+' or empty levels`);
  const username = u.username ? decodeURIComponent(u.username) : env.PLUMBLINE_MQTT_USERNAME || undefined;
  const password = u.password ? decodeURIComponent(u.password) : env.PLUMBLINE_MQTT_PASSWORD || undefined;
  const server = `${u.protocol}//${u.hostname.includes(':') ? `[${u.hostname.replace(/^\[|\]$/g, '')}]` : u.hostname}:${port}`;
  return { server, prefix, username, password, display: `${server}/${prefix}${username ? ` (user ${username})` : ''}` };
}

/** A URL with its password replaced by ***, for messages (mqtt:// and postgres:// alike). */
export function redactUrl(text: string): string {
  return text.replace(/(\/\/[^/@:\s]*):[^@/\s]*@/g, '$1:***@').replace(/([?&]password=)[^&\s]*/gi, '$1***');
}

/** Removes every occurrence of the given secrets from a message. */
export function scrub(message: string, secrets: readonly (string | undefined)[]): string {
  let m = redactUrl(message);
  for (const s of secrets) if (s && s.length > 0) m = m.split(s).join('***');
  return m;
}

/** The default station id: this machine's name and the data folder's, e.g. `bench3-probe-a`. */
export function defaultStationId(dataDir: string): string {
  const slug = (s: string) => s.replace(/[^A-Za-z0-9._-]+/g, '-').replace(/^-+|-+$/g, '');
  return `${slug(hostname()) || 'host'}-${slug(basename(dataDir)) || 'data'}`.slice(0, 80);
}

export const topics = {
  status: (prefix: string, station: string) => `${prefix}/station/${station}/status`,
  data: (prefix: string, station: string, session: string) => `${prefix}/station/${station}/session/${session}/data`,
  events: (prefix: string, station: string, session: string) => `${prefix}/station/${station}/session/${session}/events`,
  replay: (prefix: string, station: string) => `${prefix}/station/${station}/replay`,
  /** Subscriptions: every station's status, every session's data, every replay request. */
  allStatus: (prefix: string) => `${prefix}/station/+/status`,
  allData: (prefix: string) => `${prefix}/station/+/session/+/data`,
};

/** Splits a topic of the tree into its parts; undefined for topics outside it. */
export function parseTopic(
  prefix: string,
  topic: string,
): { station: string; kind: 'status' | 'replay' } | { station: string; session: string; kind: 'data' | 'events' } | undefined {
  if (!topic.startsWith(`${prefix}/station/`)) return undefined;
  const rest = topic.slice(prefix.length + '/station/'.length).split('/');
  if (rest.length === 2 && (rest[1] === 'status' || rest[1] === 'replay')) return { station: rest[0], kind: rest[1] };
  if (rest.length === 4 && rest[1] === 'session' && (rest[3] === 'data' || rest[3] === 'events')) return { station: rest[0], session: rest[2], kind: rest[3] };
  return undefined;
}
