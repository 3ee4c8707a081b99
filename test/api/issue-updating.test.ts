// Issue-time updating through the API: the fit stores the updater and its per-lead scores, a run
// says which observation it was updated on, falls back (and says why) when none is recent
// enough, takes the run's own observation first, and never reads observations after issue time.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { archiveIssueError, versionArchiveInfo } from '../../src/store/models-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody, smallFit } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 5, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const lastIndex = scenario.times.length - 1;
let versionId = '';

const post = (body: unknown) => t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: body as object });
const body = (i: number, extra: Record<string, unknown> = {}) => scenarioRunBody(scenario.forecastRun(i), { trajectories: 300, seed: 7, ...extra });
const setObservations = (indices: number[], values: (number | null)[]) =>
  t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/observations`, payload: { unit: 'm3/s', times: indices.map((i) => scenario.times[i]), values } });

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario);
  const job = await fitThroughApi(t, runner, gaugeId, { ...smallFit, updating: { mode: 'on', trees: false } });
  versionId = job.result.versionId;
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

describe('fitting with updating', () => {
  it('stores the updater, its candidates scored per lead and its archive with the version', async () => {
    const v = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${versionId}` })).json();
    expect(v.updating.method).toMatch(/^(ar1|phi-per-lead)$/);
    expect(v.updating.phi).toHaveLength(10);
    const u = v.scores.updating;
    expect(u.status).toBe('on');
    expect(u.candidates.map((c: { name: string }) => c.name)).toEqual(['none', 'ar1', 'phi-per-lead']);
    for (const c of u.candidates) {
      expect(c.byLead).toHaveLength(10);
      for (const l of c.byLead) expect(l.crps).toBeGreaterThan(0);
    }
    // Held-out block C follows the early-stopping block B, which follows the fitting block A.
    expect(u.blocks.fit.to < u.blocks.earlyStopping.from).toBe(true);
    expect(u.blocks.earlyStopping.to < u.blocks.heldOut.from).toBe(true);
    expect(v.archives.some((a: { leadMode: string; nLeads: number }) => a.leadMode === 'updating' && a.nLeads === 10)).toBe(true);
    // Each case of the updated members' archive keeps its issue-time error, aligned with the cases.
    const info = (await versionArchiveInfo(t.db, versionId, 'corrected', 'updating'))!;
    const issueError = (await archiveIssueError(t.db, info.id))!;
    expect(issueError.length).toBe(info.summary.cases);
    expect(issueError.every(Number.isFinite)).toBe(true);
  });

  it('refuses bad updating options, naming the field', async () => {
    const res = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { updating: { mode: 'sometimes' } } });
    expect(res.statusCode).toBe(422);
    expect(JSON.stringify(res.json().errors)).toMatch(/body\.updating\.mode/);
    const bands = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { updating: { leads: 5, leadBands: [[1, 3], [4, 8]] } } });
    expect(bands.statusCode).toBe(422);
    expect(JSON.stringify(bands.json().errors)).toMatch(/body\.updating\.leadBands\[1\]/);
  });
});

describe('hindcasts per lead', () => {
  it('report raw, corrected, updated and both stochastic stages per lead', async () => {
    const from = scenario.times[lastIndex - 150];
    const to = scenario.times[lastIndex - 90];
    const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/hindcasts`, payload: { mode: 'simulation', from, to, trajectories: 200, seed: 3, sizeStudy: { sources: [] } } });
    expect(started.statusCode, started.body).toBe(202);
    await runner.drain();
    const h = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts/${started.json().id}` })).json();
    expect(h.status, h.error).toBe('succeeded');
    const u = h.result.updating;
    expect(u.byLead).toHaveLength(10);
    for (const r of u.byLead) {
      for (const v of Object.values(r.crps)) expect(v).toBeGreaterThan(0);
      expect(r.coverage95.stochasticUpdated).toBeGreaterThanOrEqual(0);
      expect(r.cases).toBeGreaterThan(30);
    }
    expect(h.result.errorArchive.leadMode).toBe('updating');
  });
});

describe('serving with updating', () => {
  it('updates on the latest stored observation at issue time and says which', async () => {
    const i = lastIndex - 40;
    const res = await post(body(i));
    expect(res.statusCode, res.body).toBe(201);
    const a = res.json();
    expect(a.updating.status).toBe('on');
    expect(a.updating.observation).toEqual({ time: scenario.times[i], value: scenario.observedFlow[i], source: 'archive', ageSteps: 0 });
    expect(a.errorArchive.leadMode).toBe('updating');
    // No past runs stored for this gauge: nothing measured the forecast-forcing error, and the answer says so.
    expect(a.errorArchive.leadGrowth).toEqual({ source: 'none', note: expect.stringMatching(/no forecast-forcing error/) });
    const text = await t.as('read', { method: 'GET', url: `/forecasts/${a.id}?format=text` });
    expect(text.body).toMatch(/NOTE: the bands come from errors of pseudo-forecasts after updating, which carry no forecast-forcing error/);
    const row = (await t.db.query<{ v: number; s: string }>('select issue_observation_value as v, issue_observation_source as s from forecast_runs where id = $1', [a.id])).rows[0];
    expect(row).toEqual({ v: scenario.observedFlow[i], s: 'archive' });
  });

  it('leakage: changing observations after the issue time leaves the answer unchanged', async () => {
    const i = lastIndex - 60;
    const first = (await post(body(i, { source: 'leak-a' }))).json();
    const later = Array.from({ length: 12 }, (_, k) => i + 1 + k);
    expect((await setObservations(later, later.map((j) => (scenario.observedFlow[j] ?? 1) * 3 + 50))).statusCode).toBeLessThan(300);
    const second = (await post(body(i, { source: 'leak-b' }))).json();
    for (const key of ['updating', 'quantiles', 'thresholds', 'ensemble', 'recent'] as const) expect(second[key]).toEqual(first[key]);
  });

  it('a stale observation takes the fallback path and says so', async () => {
    const i = lastIndex - 80;
    // The observations at issue time and the two steps before go missing: the latest is 3 steps old.
    expect((await setObservations([i - 2, i - 1, i], [null, null, null])).statusCode).toBeLessThan(300);
    const res = await post(body(i));
    expect(res.statusCode, res.body).toBe(201);
    const a = res.json();
    expect(a.status).toBe('corrected');
    expect(a.updating.status).toBe('off');
    expect(a.updating.observation).toBeNull();
    expect(a.updating.reason).toMatch(/older than the gauge's maximum age \(2 steps\)/);
    expect(a.errorArchive.leadMode).toBe('lead-free');
    // The gauge may allow older observations: then it updates on the one 3 steps back.
    expect((await t.as('admin', { method: 'PATCH', url: `/gauges/${gaugeId}`, payload: { updatingMaxAgeSteps: 3 } })).statusCode).toBe(200);
    const res3 = await post(body(i, { source: 'age-3' }));
    expect(res3.json().updating.observation).toMatchObject({ time: scenario.times[i - 3], ageSteps: 3, source: 'archive' });
    await t.as('admin', { method: 'PATCH', url: `/gauges/${gaugeId}`, payload: { updatingMaxAgeSteps: 2 } });
  });

  it('with no observation at all it falls back and says so', async () => {
    const i = lastIndex - 100;
    const gap = Array.from({ length: 40 }, (_, k) => i - 39 + k);
    expect((await setObservations(gap, gap.map(() => null))).statusCode).toBeLessThan(300);
    const a = (await post(body(i))).json();
    expect(a.updating.status).toBe('off');
    expect(a.updating.reason).toMatch(/no observation at or before the issue time/);
  });

  it("the run's own issue-time observation wins and is stored with the run", async () => {
    const i = lastIndex - 100; // no stored observation here (previous test)
    const res = await post(body(i, { source: 'with-observation', issueObservation: 12.5 }));
    expect(res.statusCode, res.body).toBe(201);
    const a = res.json();
    expect(a.updating).toMatchObject({ status: 'on', observation: { time: scenario.times[i], value: 12.5, source: 'run', ageSteps: 0 } });
    const row = (await t.db.query<{ v: number; s: string }>('select issue_observation_value as v, issue_observation_source as s from forecast_runs where id = $1', [a.id])).rows[0];
    expect(row).toEqual({ v: 12.5, s: 'run' });
    const text = await t.as('read', { method: 'GET', url: `/forecasts/${a.id}?format=text` });
    expect(text.statusCode).toBe(200);
    expect(text.body).toMatch(/updated on the observation of .* \(12\.5 m3\/s, from the run\)/);
  });

  it('stored-run verification scores runs served with and without updating apart', async () => {
    const v = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification` })).json();
    const split = v.byUpdating;
    // Runs above: several updated, two served without (stale observation, none at all).
    expect(split.on.runs).toBeGreaterThanOrEqual(4);
    expect(split.off.runs).toBe(2);
    expect(split.on.runs + split.off.runs).toBe(v.runs.corrected);
    const observed = split.on.byLead.filter((l: { cases: number }) => l.cases > 0);
    expect(observed.length).toBeGreaterThan(0);
    for (const l of observed) {
      expect(l.crps.corrected).toBeGreaterThan(0);
      expect(l.crps.stochastic).toBeGreaterThan(0);
      expect(l.coverage95).toBeGreaterThanOrEqual(0);
      expect(l.coverage95).toBeLessThanOrEqual(1);
    }
    expect(split.note).toMatch(/different runs/);
    const csv = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification?format=csv` })).body;
    expect(csv).toMatch(/\nruns served with updating,,,\d+,\d+,\n/);
    expect(csv).toMatch(/\nCRPS at lead 1 \(runs served with updating\),m3\/s,,[\d.]+,[\d.]+,\n/);
    const text = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification?format=text` })).body;
    expect(text).toMatch(/Runs served with updating \(\d+\) and without \(2\)/);
  });
});
