import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario, type Scenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend } from '../helpers/scenario-send.ts';
import { jsonWithFields } from '../../src/services/correct-run.ts';

// Two gauges with raw error archives (no model: runs are served degraded, which is enough here).
let t: TestApp;
const scenario = buildScenario({ seed: 21, years: 3, members: 5 });
const first = scenario.gauge.id;
const second = 'second-brook-at-lower-ford';
const last = scenario.times.length - 1;

function asGauge(s: Scenario, id: string): Scenario {
  return Object.create(s, { gauge: { value: { ...s.gauge, id } } });
}

function runBody(index: number, extra: Record<string, unknown> = {}) {
  const run = scenario.forecastRun(index);
  return { issueTime: run.issueTime, unit: 'm3/s', warmupSteps: run.warmupSteps, members: run.members.map((m) => ({ id: m.id, values: m.values })), trajectories: 200, ...extra };
}

const post = (gauge: string, body: unknown, headers: Record<string, string> = {}) =>
  t.as('ingest', { method: 'POST', url: `/gauges/${gauge}/runs`, payload: body as object, headers });
const runsOf = async (gauge: string) => Number((await t.db.query<{ n: number }>('select count(*)::int as n from forecast_runs where gauge_id = $1', [gauge])).rows[0].n);

beforeAll(async () => {
  t = await makeTestApp();
  const runner = new JobRunner(t.db, jobHandlers, { info() {}, warn() {}, error() {} } as never, 60_000);
  for (const id of [first, second]) {
    await loadScenarioArchive(injectSend(t), asGauge(scenario, id));
    const job = await t.as('admin', { method: 'POST', url: `/gauges/${id}/raw-archive`, payload: { templateLength: 20 } });
    expect(job.statusCode).toBe(202);
  }
  await runner.drain();
  await runner.stop();
});
afterAll(async () => t?.close());

describe('Idempotency-Key is scoped by gauge', () => {
  it('stores a run on a second gauge that reuses the first gauge’s key, and replays only on the same gauge', async () => {
    const body = runBody(last - 20, { source: 'keyed' });
    const a = await post(first, body, { 'idempotency-key': 'cycle-7' });
    expect(a.statusCode, a.body).toBe(201);
    const b = await post(second, body, { 'idempotency-key': 'cycle-7' });
    expect(b.statusCode, b.body).toBe(201);
    expect(b.headers['idempotent-replayed']).toBeUndefined();
    expect(b.json().gaugeId ?? b.json().gauge?.id).toBe(second);
    expect(b.json().id).not.toBe(a.json().id);
    expect(await runsOf(second)).toBe(1);
    const again = await post(second, body, { 'idempotency-key': 'cycle-7' });
    expect(again.statusCode).toBe(200);
    expect(again.json().id).toBe(b.json().id);
  });

  it('answers a problem, not a replay, when a key is reused with a different body on the same gauge', async () => {
    const before = await runsOf(first);
    const c = await post(first, runBody(last - 21, { source: 'keyed' }), { 'idempotency-key': 'cycle-7' });
    expect(c.statusCode).toBe(409);
    expect(c.headers['content-type']).toContain('application/problem+json');
    expect(c.json().detail).toMatch(/Idempotency-Key/);
    expect(await runsOf(first)).toBe(before);
  });
});

describe('absurd flows in a run', () => {
  it.each([1e300, 3.5e38, 1e7])('refuses a run whose every flow is %d and stores nothing', async (v) => {
    const body = runBody(last - 30, { source: `absurd-${String(v).length}` });
    for (const m of body.members) m.values = m.values.map(() => v);
    const before = await runsOf(first);
    const res = await post(first, body);
    expect(res.statusCode, res.body.slice(0, 300)).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.json().errors[0].path).toMatch(/^body\.members\[0\]\.values\[\d+\]$/);
    expect(await runsOf(first)).toBe(before);
    const latest = await t.as('read', { method: 'GET', url: `/gauges/${first}/forecasts/latest` });
    expect(latest.body).not.toMatch(/Infinity|1e\+300/);
  });

  it('refuses an absurd issue-time observation', async () => {
    const res = await post(first, runBody(last - 31, { source: 'absurd-obs', issueObservation: 1e300 }));
    expect(res.statusCode).toBe(422);
    expect(res.json().errors.map((e: { path: string }) => e.path)).toContain('body.issueObservation');
  });
});

describe('stored run input', () => {
  it('jsonWithFields gives the text JSON.stringify gives for the body with the extra fields', () => {
    const cases: [object, Record<string, unknown>][] = [
      [{ a: 1, b: [1.5, null, 'x'], c: { d: true } }, { form: 'json', archiveWarmup: null }],
      [{ a: 1 }, { form: 'csv', archiveWarmup: { members: { m1: [1, null] }, forcings: {} } }],
      [{}, { form: 'json' }], // empty body
      [{ a: 1, form: 'old' }, { form: 'json', archiveWarmup: null }], // a key already in the body keeps its place
      [{ a: 1, skip: undefined }, { form: 'json', gone: undefined }], // undefined values are left out
      [{ a: 1 }, { gone: undefined }], // nothing to add
    ];
    for (const [body, extra] of cases) expect(jsonWithFields(JSON.stringify(body), body, extra)).toBe(JSON.stringify({ ...body, ...extra }));
  });

  it('a stored run keeps the body it was posted with, its form and what the archive added', async () => {
    const body = runBody(last - 30, { source: 'stored-input' });
    const res = await post(first, body);
    expect(res.statusCode, res.body).toBe(201);
    const { input } = (await t.db.query<{ input: string }>('select input from forecast_runs where id = $1', [res.json().id])).rows[0];
    const stored = JSON.parse(input);
    expect(JSON.stringify(stored)).toBe(input); // one object, no repeated key
    for (const [k, v] of Object.entries(body)) expect(stored[k]).toEqual(v);
    expect(stored.form).toBe('json');
    expect(stored.archiveWarmup).toBeNull();
  });
});
