import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario, type ForecastRun } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody, smallFit } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 5, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const lastIndex = scenario.times.length - 1;

function runBody(run: ForecastRun, extra: Record<string, unknown> = {}) {
  return scenarioRunBody(run, { trajectories: 500, ...extra });
}

const post = (body: unknown, headers: Record<string, string> = {}) => t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: body as object, headers });
const runCount = async () => Number((await t.db.query<{ n: number }>('select count(*)::int as n from forecast_runs')).rows[0].n);

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario);
  await fitThroughApi(t, runner, gaugeId, { ...smallFit, params: { nRounds: 80, learningRate: 0.15, maxDepth: 4, patience: 10 } });
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

describe('correcting a raw run', () => {
  let first: Record<string, any>;

  it('returns monotone quantiles, probabilities in [0, 1], the caution and what made it', async () => {
    const res = await post(runBody(scenario.forecastRun(lastIndex - 20)));
    expect(res.statusCode, res.body).toBe(201);
    expect(res.headers.etag).toMatch(/^"[\w-]+"$/);
    first = res.json();
    expect(first.status).toBe('corrected');
    expect(first.caution).toMatch(/decided and issued by the responsible local authority/);
    expect(first.modelVersion.id).toBeTruthy();
    expect(first.leadTimes).toEqual(Array.from({ length: 10 }, (_, k) => `P${k + 1}D`));
    expect(first.trajectories).toBe(500);
    const q = first.quantiles.values as number[][];
    expect(first.quantiles.probabilities).toEqual([0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95]);
    for (let k = 0; k < 10; k++) for (let i = 1; i < q.length; i++) expect(q[i][k]).toBeGreaterThanOrEqual(q[i - 1][k]);
    for (const th of first.thresholds) {
      for (const p of [...th.exceedance, th.anyTime]) expect(p >= 0 && p <= 1).toBe(true);
      // Exceeding at some lead is at least as likely as at any single lead.
      expect(th.anyTime).toBeGreaterThanOrEqual(Math.max(...th.exceedance) - 1e-12);
      expect(th.attention).toBe(th.anyTime >= first.attentionLevel);
    }
    expect(first.ensemble.raw).toHaveLength(6);
    expect(first.ensemble.corrected).toHaveLength(6);
    expect(Object.keys(first.timings)).toEqual(['featuresMs', 'inferenceMs', 'stochasticMs', 'totalMs']);
    // Where the milliseconds went (W3C Server Timing): every stage of the run path, none negative,
    // the parts within the total.
    const stages = new Map(String(res.headers['server-timing']).split(', ').map((p) => [p.split(';dur=')[0], Number(p.split(';dur=')[1])]));
    expect([...stages.keys()].sort()).toEqual(['features', 'hash', 'inference', 'knn', 'parse', 'reads', 'sampling', 'serialise', 'shuffle', 'stage-setup', 'summary', 'total', 'validate', 'worker', 'writes']);
    let parts = 0;
    for (const [name, ms] of stages) {
      if (name === 'total') continue;
      // The worker's share is the pool's time less the worker's own clock: a hair below 0 is rounding.
      expect(ms, name).toBeGreaterThanOrEqual(name === 'worker' ? -0.5 : 0);
      parts += ms;
    }
    expect(parts).toBeLessThanOrEqual(stages.get('total')! + 0.5);
  });

  it('answers a repeated post with the stored run and creates nothing', async () => {
    const before = await runCount();
    const again = await post(runBody(scenario.forecastRun(lastIndex - 20)));
    expect(again.statusCode).toBe(200);
    expect(again.headers['idempotent-replayed']).toBe('true');
    expect(again.json()).toEqual(first);
    expect(await runCount()).toBe(before);
  });

  it('honours Idempotency-Key and refuses its reuse for different content', async () => {
    const body = runBody(scenario.forecastRun(lastIndex - 30), { source: 'keyed' });
    const a = await post(body, { 'idempotency-key': 'cycle-0001' });
    expect(a.statusCode).toBe(201);
    const b = await post(body, { 'idempotency-key': 'cycle-0001' });
    expect(b.statusCode).toBe(200);
    expect(b.json().id).toBe(a.json().id);
    const before = await runCount();
    const c = await post(runBody(scenario.forecastRun(lastIndex - 31), { source: 'keyed' }), { 'idempotency-key': 'cycle-0001' });
    expect(c.statusCode).toBe(409);
    expect(await runCount()).toBe(before);
  });

  it('gives the same answer for the same seed', async () => {
    const run = scenario.forecastRun(lastIndex - 40);
    const a = (await post(runBody(run, { source: 'seed-a', seed: 4242 }))).json();
    const b = (await post(runBody(run, { source: 'seed-b', seed: 4242 }))).json();
    expect(b.quantiles).toEqual(a.quantiles);
    expect(b.thresholds).toEqual(a.thresholds);
    const c = (await post(runBody(run, { source: 'seed-c', seed: 4243 }))).json();
    expect(c.quantiles).not.toEqual(a.quantiles);
  });

  it('gives each probability its Monte-Carlo standard error and says when the trajectories are too few', async () => {
    const run = scenario.forecastRun(lastIndex - 41);
    const coarse = (await post(runBody(run, { source: 'coarse', trajectories: 100 }))).json();
    // Binomial standard error √(p(1 − p)/N) of a proportion from N independent draws.
    for (const th of coarse.thresholds) {
      expect(th.anyTimeStandardError).toBeCloseTo(Math.sqrt((th.anyTime * (1 - th.anyTime)) / 100), 4);
      th.exceedance.forEach((p: number, k: number) => expect(th.exceedanceStandardError[k]).toBeCloseTo(Math.sqrt((p * (1 - p)) / 100), 4));
    }
    expect(coarse.probabilityNote).toMatch(/Only 100 trajectories: the probabilities are coarse/);
    const fine = (await post(runBody(run, { source: 'fine', trajectories: 400 }))).json();
    expect(fine.probabilityNote).toBeUndefined();
    const text = await t.as('read', { method: 'GET', url: `/forecasts/${coarse.id}?format=text` });
    expect(text.body).toMatch(/sampling error of each probability: at most ±5 points/);
    expect(text.body).toMatch(/NOTE: Only 100 trajectories/);
  });

  it.each([
    ['unknown member', (b: any) => (b.members[1].id = 'p99'), 'body.members[1].id', /unknown member/],
    ['negative flow', (b: any) => (b.members[0].values[12] = -1), 'body.members[0].values[12]', /negative/],
    ['missing value at a lead time', (b: any) => (b.members[0].values[12] = null), 'body.members[0].values[12]', /cannot be missing/],
    ['mismatched member lengths', (b: any) => b.members[2].values.pop(), 'body.members[2].values', /has 19 values/],
    // A forcing may hold the lead times only (the archive gives the warm-up), never fewer.
    ['a forcing shorter than the lead times', (b: any) => b.forcings.precipitation.splice(0, 11), 'body.forcings.precipitation', /has 9 values; give at least one per lead time \(10\)/],
    ['issue time off the step', (b: any) => (b.issueTime = '2008-06-01T06:00:00Z'), 'body.issueTime', /time step/],
    ['a unit that is not a flow unit', (b: any) => (b.unit = 'm3/h'), 'body.unit', /m3\/s \(or m3 s-1\), l\/s/],
    ['too many trajectories', (b: any) => (b.trajectories = 10_000_000), 'body.trajectories', /at most/],
    ['horizon beyond the archive', (b: any) => b.members.forEach((m: any) => m.values.push(...new Array(40).fill(1))), 'body.members[0].values', /at most 30/],
    ['a forcing the model needs', (b: any) => delete b.forcings.precipitation, 'body.forcings.precipitation', /./],
    ['non-finite value', (b: any) => (b.members[0].values[3] = 'NaN'), 'body.members[0].values[3]', /finite/],
    ['decreasing quantiles', (b: any) => (b.quantiles = [0.9, 0.1]), 'body.quantiles', /increasing/],
  ])('refuses %s, naming the field, and stores nothing', async (_name, change, path, message) => {
    const body = runBody(scenario.forecastRun(lastIndex - 50), { source: `bad-${_name.replace(/\W+/g, '-')}` }) as any;
    change(body);
    const before = await runCount();
    const res = await post(body);
    expect(res.statusCode, res.body).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    const hit = res.json().errors.find((e: { path: string }) => e.path.startsWith(path));
    expect(hit, JSON.stringify(res.json().errors)).toBeDefined();
    expect(hit.message).toMatch(message);
    expect(await runCount()).toBe(before);
  });
});

describe('degraded mode is never silent', () => {
  it('runs on the raw members and raw archive with no active model, and says so', async () => {
    await t.db.query('update model_versions set active = false where gauge_id = $1', [gaugeId]);
    const res = await post(runBody(scenario.forecastRun(lastIndex - 60), { source: 'no-model' }));
    expect(res.statusCode, res.body).toBe(201);
    const body = res.json();
    expect(body.status).toBe('degraded');
    expect(body.degradedReason).toMatch(/no active residual model/);
    expect(body.modelVersion).toBeNull();
    expect(body.ensemble.corrected).toBeNull();
    expect(body.caution).toBeTruthy();
    const metrics = await t.as('read', { method: 'GET', url: '/metrics' });
    expect(metrics.body).toMatch(/sft_degraded_runs_total\{reason="no-model"\} [1-9]/);
    await t.db.query('update model_versions set active = true where id = (select max(id) from model_versions where gauge_id = $1)', [gaugeId]);
  });

  it('fails clearly with neither a model nor a raw archive', async () => {
    await t.as('admin', { method: 'POST', url: '/gauges', payload: { id: 'bare-gauge', name: 'Bare', catchmentAreaKm2: 10, timeStep: 'P1D', flowUnit: 'm3/s' } });
    const res = await t.as('ingest', { method: 'POST', url: '/gauges/bare-gauge/runs', payload: { issueTime: '2020-01-01T00:00:00Z', unit: 'm3/s', members: [{ id: 'a', values: [1, 2] }] } });
    expect(res.statusCode).toBe(409);
    expect(res.json().detail).toMatch(/fit a model/);
  });
});

describe('reading forecasts', () => {
  it('serves the latest run as JSON with a strong ETag and 304, as CSV, and as a plain-text table', async () => {
    const json = await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest` });
    expect(json.statusCode).toBe(200);
    expect(json.headers['cache-control']).toContain('max-age');
    const etag = json.headers.etag as string;
    expect(etag).toMatch(/^"/);
    const latest = json.json();
    // The newest by issue time, whatever order they were posted in.
    expect(latest.issueTime).toBe(scenario.times[lastIndex - 20]);
    const again = await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest`, headers: { 'if-none-match': etag } });
    expect(again.statusCode).toBe(304);
    expect(again.body).toBe('');

    const csv = await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest?format=csv` });
    expect(csv.headers['content-type']).toContain('text/csv');
    const lines = csv.body.trim().split('\n');
    // No comment lines: the header comes first, the caution travels in a column and a header.
    expect(lines[0].split(',')[0]).toBe('lead_time');
    expect(lines[0].endsWith(',gauge_id,issue_time,status,seed,caution')).toBe(true);
    expect(lines).toHaveLength(1 + 10);
    expect(Number(lines[1].split(',')[5])).toBe(latest.quantiles.values[3][0]);
    expect(lines[1]).toContain(`,${gaugeId},${latest.issueTime},${latest.status},${latest.seed},`);
    expect(lines[1]).toMatch(/responsible local authority/);
    expect(csv.headers.caution).toBe(latest.caution);

    const text = await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest`, headers: { accept: 'text/plain' } });
    expect(text.headers['content-type']).toContain('text/plain');
    expect(text.body).toContain('CAUTION:');
    expect(text.body).toMatch(/P1D\s+\d{4}-\d{2}-\d{2} 00:00Z/);
    expect(text.body).toContain(`P>${latest.thresholds[0].label}`);
    expect(text.body).toContain('any time');
  });

  it('reads a run by id and lists runs in a window', async () => {
    const latest = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest` })).json();
    const byId = await t.as('read', { method: 'GET', url: `/forecasts/${latest.id}` });
    expect(byId.json()).toEqual(latest);
    const list = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts?from=${scenario.times[lastIndex - 45]}` })).json();
    expect(list.runs.length).toBeGreaterThanOrEqual(4);
    for (const r of list.runs) expect(r.issueTime >= scenario.times[lastIndex - 45]).toBe(true);
    expect((await t.as('read', { method: 'GET', url: '/forecasts/00000000-0000-4000-8000-000000000000' })).statusCode).toBe(404);
  });

  it('gives an overview of every gauge with its highest probability per threshold', async () => {
    const o = (await t.as('read', { method: 'GET', url: '/overview' })).json();
    expect(o.caution).toBeTruthy();
    const g = o.gauges.find((x: { id: string }) => x.id === gaugeId);
    expect(g.latest.issueTime).toBe(scenario.times[lastIndex - 20]);
    expect(g.thresholds.map((x: { label: string }) => x.label)).toEqual(scenario.gauge.thresholds.map((x) => x.label));
    for (const th of g.thresholds) expect(th.maxExceedance >= 0 && th.maxExceedance <= 1).toBe(true);
    expect(o.gauges.find((x: { id: string }) => x.id === 'bare-gauge').status).toBe('no-forecast');
  });

  it('announces new runs as server-sent events through LISTEN/NOTIFY', async () => {
    await t.app.listen({ port: 0, host: '127.0.0.1' });
    const address = t.app.server.address() as { port: number };
    const controller = new AbortController();
    const res = await fetch(`http://127.0.0.1:${address.port}/events`, { headers: { authorization: `Bearer ${t.tokens.read}` }, signal: controller.signal });
    expect(res.headers.get('content-type')).toContain('text/event-stream');
    const reader = res.body!.getReader();
    const posted = post(runBody(scenario.forecastRun(lastIndex - 12), { source: 'announced' }));
    let text = '';
    const decoder = new TextDecoder();
    const deadline = Date.now() + 20_000;
    while (!text.includes('event: forecast') && Date.now() < deadline) {
      const { value, done } = await reader.read();
      if (done) break;
      text += decoder.decode(value);
    }
    const run = (await posted).json();
    controller.abort();
    expect(text).toContain('event: forecast');
    expect(text).toContain(run.id);
  });

  it('counts requests and stage timings in /metrics', async () => {
    const m = (await t.as('read', { method: 'GET', url: '/metrics' })).body;
    expect(m).toMatch(/sft_http_requests_total\{method="POST",route="\/gauges\/:id\/runs",status="201"\} \d+/);
    expect(m).toMatch(/sft_correction_stage_seconds_count\{stage="inference"\} \d+/);
    expect(m).toMatch(/sft_model_cache_total\{result="hit"\} \d+/);
  });
});

describe('a failing residual model', () => {
  it('falls back to the raw members and raw archive, and says why', async () => {
    // A version whose stored ONNX bytes are damaged: the worker cannot load it.
    const { rows } = await t.db.query<{ id: string }>(
      `insert into model_versions (gauge_id, origin, label, feature_spec, trainer, periods, scores)
       select gauge_id, origin, 'damaged copy', feature_spec, trainer, periods, scores from model_versions
        where gauge_id = $1 and active returning id::text as id`,
      [gaugeId],
    );
    const damaged = rows[0].id;
    await t.db.query(`insert into model_parts (version_id, part, onnx) values ($1, 0, $2)`, [damaged, Buffer.from('not onnx at all')]);
    await t.db.query(
      `insert into error_archives (gauge_id, version_id, kind, lead_mode, cases, summary, bytes)
       select gauge_id, $1, kind, lead_mode, cases, summary, bytes from error_archives
        where version_id = (select id from model_versions where gauge_id = $2 and active) and kind = 'corrected'`,
      [damaged, gaugeId],
    );
    const previous = (await t.db.query<{ id: string }>('select id::text as id from model_versions where gauge_id = $1 and active', [gaugeId])).rows[0].id;
    expect((await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/${damaged}/activate` })).statusCode).toBe(200);

    const res = await post(runBody(scenario.forecastRun(lastIndex - 70), { source: 'damaged-model' }));
    expect(res.statusCode, res.body).toBe(201);
    const body = res.json();
    expect(body.status).toBe('degraded');
    expect(body.degradedReason).toMatch(new RegExp(`version ${damaged}\\) failed`));
    expect(body.modelVersion).toBeNull();
    await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/${previous}/activate` });
  });
});
