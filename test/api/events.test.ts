// Server-sent events: ids, resume from the store with Last-Event-ID, retry, and stream tickets.
// Runs are stored through the store's insertRun (the one function the correction service stores
// runs with), so the stream is tested without fitting a model.
import { Writable } from 'node:stream';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.ts';
import { insertRun } from '../../src/store/forecasts-repo.ts';
import { makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
let base: string;
const extraApps: { close(): Promise<unknown> }[] = [];

beforeAll(async () => {
  t = await makeTestApp();
  expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(201);
  base = await t.app.listen({ port: 0, host: '127.0.0.1' });
});
afterAll(async () => {
  for (const a of extraApps) await a.close();
  await t.close();
});

let nextDay = 0;
/** Stores a minimal run the way the correction service does (insert + NOTIFY in one transaction). */
async function storeRun(): Promise<{ id: string; issueTime: string }> {
  const day = nextDay++;
  const issueTimeMs = Date.parse('2024-03-01T00:00:00Z') + day * 86_400_000;
  const id = crypto.randomUUID();
  await t.db.transaction((tx) =>
    insertRun(tx, {
      id, gaugeId: riverGauge.id, issueTimeMs, source: 'events-test', requestHash: id, idempotencyKey: null, status: 'degraded',
      modelVersionId: null, seed: day, input: {}, output: '{}', etag: `"${id}"`, summary: [], percentiles: [[...Array(100).keys()]],
    }),
  );
  return { id, issueTime: new Date(issueTimeMs).toISOString().replace('.000Z', 'Z') };
}

interface SseEvent {
  id?: string;
  event: string;
  data: string;
}

/** Opens an event stream and parses it (WHATWG HTML §9.2 field rules) until `until` is satisfied. */
async function openStream(url: string, headers: Record<string, string> = {}) {
  const controller = new AbortController();
  const res = await fetch(url, { headers: { accept: 'text/event-stream', ...headers }, signal: controller.signal });
  const events: SseEvent[] = [];
  let retry: number | null = null;
  let text = '';
  const reading = (async () => {
    if (!res.ok || !res.body) return;
    const decoder = new TextDecoder();
    let buffer = '';
    let cur: Partial<SseEvent> & { data?: string } = {};
    try {
      const reader = res.body.getReader();
      for (;;) {
        const { value, done } = await reader.read();
        if (done) break;
        const s = decoder.decode(value, { stream: true });
        text += s;
        buffer += s;
        let nl: number;
        while ((nl = buffer.indexOf('\n')) >= 0) {
          const line = buffer.slice(0, nl);
          buffer = buffer.slice(nl + 1);
          if (line === '') {
            if (cur.data !== undefined) events.push({ id: cur.id, event: cur.event ?? 'message', data: cur.data });
            cur = {};
          } else if (!line.startsWith(':')) {
            const colon = line.indexOf(':');
            const field = line.slice(0, colon);
            const value = line.slice(colon + 1).replace(/^ /, '');
            if (field === 'id') cur.id = value;
            else if (field === 'event') cur.event = value;
            else if (field === 'data') cur.data = cur.data === undefined ? value : `${cur.data}\n${value}`;
            else if (field === 'retry') retry = Number(value);
          }
        }
      }
    } catch {
      /* aborted */
    }
  })();
  return {
    res,
    events,
    get retry() {
      return retry;
    },
    get text() {
      return text;
    },
    async waitFor(n: number) {
      await expect.poll(() => events.length, { timeout: 10_000 }).toBeGreaterThanOrEqual(n);
    },
    async close() {
      controller.abort();
      await reading;
    },
  };
}

const ticketFor = async (role: 'read' | 'ingest' | 'admin' = 'read') => {
  const res = await t.as(role, { method: 'POST', url: '/stream-tickets' });
  expect(res.statusCode, res.body).toBe(201);
  return res.json() as { ticket: string; expiresAt: string; url: string };
};

describe('server-sent events', () => {
  it('gives every event an id and a retry time, and resumes after Last-Event-ID from the store', async () => {
    const s = await openStream(`${base}/events`, { authorization: `Bearer ${t.tokens.read}` });
    expect(s.res.status).toBe(200);
    expect(s.res.headers.get('content-type')).toContain('text/event-stream');
    // A fresh stream opens with `ready`, carrying the newest event id stored.
    await s.waitFor(1);
    expect(s.events[0].event).toBe('ready');
    expect(s.events[0].id).toBe(JSON.parse(s.events[0].data).latestEventId);
    const a = await storeRun();
    const b = await storeRun();
    await s.waitFor(3);
    expect(s.retry).toBe(5000);
    const [, ea, eb] = s.events;
    expect(BigInt(ea.id!)).toBeGreaterThan(BigInt(s.events[0].id!));
    expect(ea.event).toBe('forecast');
    expect(JSON.parse(ea.data)).toEqual({ gaugeId: riverGauge.id, runId: a.id, issueTime: a.issueTime });
    expect(JSON.parse(eb.data).runId).toBe(b.id);
    expect(ea.id).toMatch(/^\d+$/);
    expect(BigInt(eb.id!)).toBeGreaterThan(BigInt(ea.id!));
    await s.close();

    // Two runs stored while nobody listens; a second instance on the same store (as after a restart)
    // replays everything after the last id the client saw, in order, each once, then goes on live.
    const c = await storeRun();
    const d = await storeRun();
    const other = await buildApp({ db: t.db, config: t.config });
    extraApps.push(other);
    const otherBase = await other.listen({ port: 0, host: '127.0.0.1' });
    const resumed = await openStream(`${otherBase}/events`, { authorization: `Bearer ${t.tokens.read}`, 'last-event-id': ea.id! });
    await resumed.waitFor(3);
    expect(resumed.events.map((e) => JSON.parse(e.data).runId)).toEqual([b.id, c.id, d.id]);
    const e = await storeRun();
    await resumed.waitFor(4);
    expect(JSON.parse(resumed.events[3].data).runId).toBe(e.id);
    const ids = resumed.events.map((x) => BigInt(x.id!));
    expect([...ids].sort((x, y) => (x < y ? -1 : 1))).toEqual(ids);
    expect(new Set(ids).size).toBe(ids.length);
    await resumed.close();

    // Resuming from the newest id sends nothing old.
    const quiet = await openStream(`${base}/events?lastEventId=${resumed.events[3].id}`, { authorization: `Bearer ${t.tokens.read}` });
    await new Promise((r) => setTimeout(r, 300));
    expect(quiet.events).toEqual([]);
    await quiet.close();
  });

  it('tells a client that missed more than it replays to reload (resync), then goes on live', async () => {
    const start = (await t.db.query<{ n: string }>('select coalesce(max(event_seq), 0)::text as n from forecast_runs')).rows[0].n;
    // more runs than REPLAY_LIMIT (500), stored in one statement
    await t.db.query(
      `insert into forecast_runs (id, gauge_id, issue_time, source, request_hash, status, seed, input, output, etag, summary, percentiles)
       select md5('bulk' || i), $1, timestamptz '2030-01-01' + make_interval(days => i), 'bulk', md5('bulk' || i), 'degraded', i, '{}', '{}', '"x"', '[]'::jsonb, ''::bytea
         from generate_series(1, 501) as i`,
      [riverGauge.id],
    );
    const latest = (await t.db.query<{ n: string }>('select max(event_seq)::text as n from forecast_runs')).rows[0].n;
    const s = await openStream(`${base}/events`, { authorization: `Bearer ${t.tokens.read}`, 'last-event-id': start });
    await s.waitFor(1);
    expect(s.events[0].event).toBe('resync');
    expect(s.events[0].id).toBe(latest);
    const run = await storeRun();
    await s.waitFor(2);
    expect(s.events).toHaveLength(2);
    expect(JSON.parse(s.events[1].data).runId).toBe(run.id);
    await s.close();
    await t.db.query("delete from forecast_runs where source = 'bulk'");

    // an id ahead of the store (a restored backup) is not trusted: resync, then live runs arrive
    const ahead = await openStream(`${base}/events?lastEventId=999999999`, { authorization: `Bearer ${t.tokens.read}` });
    await ahead.waitFor(1);
    expect(ahead.events[0].event).toBe('resync');
    const next = await storeRun();
    await ahead.waitFor(2);
    expect(JSON.parse(ahead.events[1].data).runId).toBe(next.id);
    await ahead.close();
  });

  it('refuses a Last-Event-ID that is not one of its ids with problem details', async () => {
    const res = await t.as('read', { method: 'GET', url: '/events', headers: { 'last-event-id': 'abc' } });
    expect(res.statusCode).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.json().errors[0].path).toBe('headers.last-event-id');
  });
});

describe('stream tickets', () => {
  it('open the event stream once, within a minute, and nowhere else', async () => {
    const before = Date.now();
    const { ticket, expiresAt, url } = await ticketFor();
    expect(ticket).toMatch(/^stk_[A-Za-z0-9_-]{32}$/);
    const ttl = Date.parse(expiresAt) - before;
    expect(ttl).toBeGreaterThan(50_000);
    expect(ttl).toBeLessThanOrEqual(61_000);
    expect(url).toBe(`/events?ticket=${ticket}`);

    // Not a bearer token, and not accepted on any other route.
    expect((await t.app.inject({ method: 'GET', url: `/overview?ticket=${ticket}` })).statusCode).toBe(401);
    expect((await t.app.inject({ method: 'GET', url: '/overview', headers: { authorization: `Bearer ${ticket}` } })).statusCode).toBe(401);

    const s = await openStream(`${base}${url}`);
    expect(s.res.status).toBe(200);
    await s.waitFor(1);
    const run = await storeRun();
    await s.waitFor(2);
    expect(JSON.parse(s.events[1].data).runId).toBe(run.id);
    await s.close();

    // Used up.
    const again = await t.app.inject({ method: 'GET', url });
    expect(again.statusCode).toBe(401);
    expect(again.json().errors[0].path).toBe('query.ticket');
    // the problem's instance names the route, not the ticket
    // A problem's instance is the path only: no query (ticket or other) is echoed.
    expect(again.json().instance).toBe('/events');
  });

  it('expire, and die with their token', async () => {
    const expired = await ticketFor();
    await t.db.query("update stream_tickets set expires_at = now() - interval '1 second'");
    expect((await t.app.inject({ method: 'GET', url: expired.url })).statusCode).toBe(401);

    const made = (await t.as('admin', { method: 'POST', url: '/tokens', payload: { role: 'read', name: 'wall screen' } })).json();
    const res = await t.app.inject({ method: 'POST', url: '/stream-tickets', headers: { authorization: `Bearer ${made.token}` } });
    expect(res.statusCode).toBe(201);
    expect((await t.as('admin', { method: 'DELETE', url: `/tokens/${made.id}` })).statusCode).toBe(204);
    expect((await t.app.inject({ method: 'GET', url: res.json().url })).statusCode).toBe(401);
    expect((await t.as(null, { method: 'POST', url: '/stream-tickets' })).statusCode).toBe(401);
  });

  it('never reach the log', async () => {
    const lines: string[] = [];
    const sink = new Writable({
      write(chunk, _enc, done) {
        lines.push(String(chunk));
        done();
      },
    });
    const logged = await buildApp({ db: t.db, config: t.config, logger: pino({ level: 'info' }, sink) });
    extraApps.push(logged);
    const { ticket } = await ticketFor();
    const opened = await logged.inject({ method: 'GET', url: `/overview?ticket=${ticket}&x=1` });
    expect(opened.statusCode).toBe(401);
    const { ticket: second } = await ticketFor();
    await logged.inject({ method: 'GET', url: `/events?ticket=${encodeURIComponent(second)}&lastEventId=abc` });
    const text = lines.join('');
    expect(text).toContain('/overview?ticket=[redacted]&x=1');
    expect(text).toContain('ticket=[redacted]');
    expect(text).not.toContain(ticket);
    expect(text).not.toContain(second);
    expect(text).not.toContain(second.slice(4));
  });
});
