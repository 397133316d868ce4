/** The test services start by themselves: a private broker and a throwaway PostgreSQL cluster. */
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import mqtt from 'mqtt';
import pg from 'pg';
import { startMosquitto, startPostgres, type Broker, type Database } from '../helpers/services.js';

describe('private services', () => {
  let broker: Broker;
  let db: Database;
  beforeAll(async () => {
    [broker, db] = await Promise.all([startMosquitto(), startPostgres()]);
  });
  afterAll(async () => {
    await broker?.stop();
    await db?.stop();
  });

  it('a retained message published to the private broker reaches a later subscriber', async () => {
    const pub = await mqtt.connectAsync(broker.url);
    await pub.publishAsync('t/x', 'hello', { qos: 1, retain: true });
    await pub.endAsync();
    const sub = await mqtt.connectAsync(broker.url);
    const got = new Promise<string>((resolve) => sub.on('message', (_t, m) => resolve(String(m))));
    await sub.subscribeAsync('t/#', { qos: 1 });
    expect(await got).toBe('hello');
    await sub.endAsync();
  });

  it('the throwaway cluster answers SQL over its Unix socket only', async () => {
    const c = new pg.Client({ connectionString: db.url });
    await c.connect();
    const r = await c.query("SELECT 6 * 7 AS x, current_setting('listen_addresses') AS l");
    expect(r.rows[0]).toEqual({ x: 42, l: '' });
    await c.end();
  });
});
