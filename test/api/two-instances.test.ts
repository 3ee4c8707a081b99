import http from 'node:http';
import type { AddressInfo } from 'node:net';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.ts';
import { createToken } from '../../src/api/tokens.ts';
import { loadConfig } from '../../src/config.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import type { Db } from '../../src/store/db.ts';
import { enqueueJob, getJob } from '../../src/store/jobs-repo.ts';
import { openPostgres } from '../../src/store/postgres-driver.ts';
import { scenarioRunBody } from '../helpers/scenario-send.ts';
import { openTestDb, type TestDb } from '../helpers/test-db.ts';

// Two service instances on one PostgreSQL database, as N replicas behind a load balancer run.
const onServer = process.env.TEST_STORE === 'postgres';
const quiet = { info() {}, warn() {}, error() {} } as never;
const scenario = buildScenario({ seed: 21, years: 3, members: 5 });
const gaugeId = scenario.gauge.id;
const last = scenario.times.length - 1;

let store: TestDb;
let dbB: Db;
let a: FastifyInstance;
let b: FastifyInstance;
let tokens: { admin: string; ingest: string; read: string };

type Role = keyof typeof tokens;
const as = (app: FastifyInstance, role: Role, method: 'GET' | 'POST', url: string, payload?: object, headers: Record<string, string> = {}) =>
  app.inject({ method, url, headers: { authorization: `Bearer ${tokens[role]}`, ...headers }, ...(payload ? { payload } : {}) });
const runBody = (index: number) => scenarioRunBody(scenario.forecastRun(index), { trajectories: 200 });

describe.skipIf(!onServer)('two instances on one PostgreSQL (skipped on the embedded store: it is one process by design)', () => {
  beforeAll(async () => {
    store = await openTestDb();
    dbB = openPostgres(store.url!, 5);
    const config = loadConfig({ DATA_DIR: '/tmp/sft-test-unused', WORKERS: '1' });
    a = await buildApp({ db: store.db, config });
    b = await buildApp({ db: dbB, config });
    tokens = {
      admin: (await createToken(store.db, 'admin', 'test admin')).token,
      ingest: (await createToken(store.db, 'ingest', 'test ingest')).token,
      read: (await createToken(store.db, 'read', 'test read')).token,
    };
    await loadScenarioArchive(async (method, url, body) => {
      const res = await as(a, 'admin', method as 'GET' | 'POST', url, body as object);
      return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
    }, scenario);
    const job = await as(b, 'admin', 'POST', `/gauges/${gaugeId}/raw-archive`, { templateLength: 20 });
    expect(job.statusCode).toBe(202);
    const runner = new JobRunner(store.db, jobHandlers, quiet, 60_000);
    await runner.drain();
    await runner.stop();
    expect((await as(a, 'read', 'GET', `/jobs/${job.json().id}`)).json().status).toBe('succeeded');
  });
  afterAll(async () => {
    await a?.close();
    await b?.close();
    await dbB?.close();
    await store?.close();
  });

  it('reads a run posted to either instance from both, at once (no stale latest)', async () => {
    const first = await as(a, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, runBody(last - 30));
    expect(first.statusCode, first.body).toBe(201);
    for (const app of [a, b]) {
      const latest = await as(app, 'read', 'GET', `/gauges/${gaugeId}/forecasts/latest`);
      expect(latest.statusCode).toBe(200);
      expect(latest.headers.etag).toBe(first.headers.etag);
    }
    // Both instances now hold the first run as the latest; a newer one posted to B is read from A
    // right after B answered.
    const second = await as(b, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, runBody(last - 29));
    expect(second.statusCode, second.body).toBe(201);
    const fromA = await as(a, 'read', 'GET', `/gauges/${gaugeId}/forecasts/latest`);
    expect(fromA.headers.etag).toBe(second.headers.etag);
    const byId = await as(a, 'read', 'GET', second.headers.location as string);
    expect(byId.statusCode).toBe(200);
    expect(byId.body).toBe(second.body);
  });

  it('sends the forecast event of a run stored by one instance to listeners on the other', async () => {
    await b.listen({ port: 0, host: '127.0.0.1' });
    const port = (b.server.address() as AddressInfo).port;
    let text = '';
    const req = http.get({ port, host: '127.0.0.1', path: '/events', headers: { authorization: `Bearer ${tokens.read}`, accept: 'text/event-stream' } });
    const connected = new Promise<void>((resolve, reject) => {
      req.on('response', (res) => {
        res.setEncoding('utf8');
        res.on('data', (c: string) => {
          text += c;
          if (text.includes(': connected')) resolve();
        });
      });
      req.on('error', reject);
    });
    await connected;
    const posted = await as(a, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, runBody(last - 28));
    expect(posted.statusCode, posted.body).toBe(201);
    const runId = posted.json().id as string;
    for (let i = 0; i < 200 && !text.includes(runId); i++) await new Promise((r) => setTimeout(r, 10));
    req.destroy();
    const event = text.split('\n\n').find((e) => e.includes(runId));
    expect(event).toBeDefined();
    expect(event).toMatch(/^event: forecast\ndata: /);
    expect(JSON.parse(event!.split('data: ')[1])).toMatchObject({ gaugeId, runId });
  });

  it('keeps one run per Idempotency-Key when the same request reaches both instances at once', async () => {
    const body = runBody(last - 27);
    const headers = { 'idempotency-key': 'two-instances-key-1' };
    const [x, y] = await Promise.all([as(a, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, body, headers), as(b, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, body, headers)]);
    expect([x.statusCode, y.statusCode].sort()).toEqual([200, 201]);
    expect(x.body).toBe(y.body);
    const again = await as(b, 'ingest', 'POST', `/gauges/${gaugeId}/runs`, body, headers);
    expect(again.statusCode).toBe(200);
    expect(again.headers['idempotent-replayed']).toBe('true');
    expect(again.body).toBe(x.body);
    const { rows } = await store.db.query<{ n: number }>(`select count(*)::int as n from forecast_runs where idempotency_key = 'two-instances-key-1'`);
    expect(Number(rows[0].n)).toBe(1);
  });

  it('runs each queued job once when both instances poll the queue', async () => {
    const ran: string[] = [];
    const handlers = {
      'count-once': async (job: { id: string }) => {
        ran.push(job.id);
        await new Promise((r) => setTimeout(r, 5));
        return null;
      },
    };
    const ids: string[] = [];
    for (let i = 0; i < 30; i++) ids.push((await enqueueJob(store.db, 'count-once', null, {}, null)).id);
    const runners = [new JobRunner(store.db, handlers, quiet, 60_000), new JobRunner(dbB, handlers, quiet, 60_000)];
    await Promise.all(runners.map((r) => r.drain()));
    await Promise.all(runners.map((r) => r.stop()));
    expect([...ran].sort()).toEqual([...ids].sort());
    for (const id of ids) expect((await getJob(store.db, id))!.status).toBe('succeeded');
  });
});
