// Per-lead error archives from stored past runs (reforecasts), built after fitting and after an
// upload, and chosen by POST /gauges/:id/runs when the run's lead times fit within them.
// Expected sizes are counted here from the scenario itself (issues in the held-out archive block
// of the validation period, observed leads), not taken from the service.
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { archiveFromBytes } from '../../src/core/stochastic/archive-codec.ts';
import type { ErrorArchive } from '../../src/core/stochastic/error-archive.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario, type ForecastRun } from '../../src/scenario/scenario.ts';
import { versionArchive } from '../../src/store/models-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 11, years: 3, members: 4 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const DAY = 86_400_000;
const LEADS = scenario.horizonSteps; // 10
// Updating off: these tests are about the per-lead archives of corrected members (issue-time
// updating, which serves runs from its own archive, is tested in issue-updating.test.ts).
const fitBody = { params: { nRounds: 40, learningRate: 0.2, maxDepth: 3, patience: 10 }, templateLength: 30, simLags: 5, forcingLags: 2, updating: { mode: 'off' } };

let versionId: string;
let version: Record<string, any>;
let inValidation: ForecastRun[];
/** Past runs issued in the fit's held-out archive block (the last part of the validation period). */
let inArchive: ForecastRun[];

async function fit(body: object) {
  const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: body });
  expect(started.statusCode, started.body).toBe(202);
  await runner.drain();
  const job = (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
  expect(job.status, job.error).toBe('succeeded');
  return job.result;
}

/**
 * What the per-lead archive must hold, counted from the scenario: one case per issue and observed
 * lead (the ensemble mean's error), and templates: the issues missing at most 10 % of their leads
 * (one of ten here).
 */
function expected(runs: ForecastRun[]) {
  const perLead = new Array(LEADS).fill(0);
  let templates = 0;
  let issues = 0;
  for (const run of runs) {
    const obs = scenario.observedFlow.slice(run.issueTimeIndex + 1, run.issueTimeIndex + 1 + LEADS);
    obs.forEach((y, h) => {
      if (y !== null) perLead[h] += 1;
    });
    if (obs.filter((y) => y === null).length <= Math.floor(0.1 * LEADS)) templates += 1;
    if (obs.some((y) => y !== null)) issues++;
  }
  return { perLead, cases: perLead.reduce((a, b) => a + b, 0), templates, issues };
}

const groupSizes = (a: ErrorArchive) => Array.from({ length: a.nLeads }, (_, h) => a.groupStart[h + 1] - a.groupStart[h]);

/** A served run's body: warm-up from the archive, lead values and forcings as given. */
function runBody(issueIndex: number, leadValues: (m: number, k: number) => number, nLeads: number, extra: Record<string, unknown> = {}) {
  const w = scenario.warmupSteps;
  const from = issueIndex - w + 1;
  return {
    issueTime: scenario.times[issueIndex],
    unit: 'm3/s',
    warmupSteps: w,
    members: scenario.memberIds.map((id, m) => ({
      id,
      values: [...scenario.memberSimulations[id].slice(from, issueIndex + 1), ...Array.from({ length: nLeads }, (_, k) => leadValues(m, k))],
    })),
    // The archived forcings, which are also what the per-lead archive's feature rows read.
    forcings: {
      precipitation: scenario.forcings.precipitation.slice(from, issueIndex + 1 + nLeads),
      air_temperature: scenario.forcings.air_temperature.slice(from, issueIndex + 1 + nLeads),
    },
    trajectories: 200,
    ...extra,
  };
}
const post = (body: object) => t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: body });

beforeAll(async () => {
  // The scenario holds far fewer past runs than the default minimum for serving from a per-lead
  // archive; lowering it lets this file exercise that path (the default is tested in test/models/archive-choice.test.ts).
  t = await makeTestApp({ PER_LEAD_MIN_RUNS: '20' });
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario, { reforecasts: true });
  const result = await fit(fitBody);
  versionId = result.versionId;
  version = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${versionId}` })).json();
  const v = { from: Date.parse(version.periods.validation.from), to: Date.parse(version.periods.validation.to) };
  inValidation = scenario.reforecasts().filter((r) => Date.parse(r.issueTime) >= v.from && Date.parse(r.issueTime) < v.to);
  const b = { from: Date.parse(version.periods.archive.from), to: Date.parse(version.periods.archive.to) };
  expect(b.from).toBeGreaterThan(v.from);
  expect(b.to).toBe(v.to);
  inArchive = scenario.reforecasts().filter((r) => Date.parse(r.issueTime) >= b.from && Date.parse(r.issueTime) < b.to);
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

describe('per-lead error archives after fitting', () => {
  it('stores a corrected and a raw per-lead archive next to the lead-free ones, sized by the past runs in the held-out archive block', async () => {
    expect(inArchive.length).toBeGreaterThanOrEqual(20);
    const want = expected(inArchive);
    const { rows } = await t.db.query<{ kind: string; lead_mode: string; cases: number }>('select kind, lead_mode, cases from error_archives where version_id = $1 order by id', [versionId]);
    expect(rows.map((r) => `${r.kind}/${r.lead_mode}`)).toEqual(['corrected/lead-free', 'raw/lead-free', 'corrected/per-lead', 'raw/per-lead']);

    for (const kind of ['corrected', 'raw'] as const) {
      const stored = (await versionArchive(t.db, versionId, kind, 'per-lead'))!;
      expect(stored.leadMode).toBe('per-lead');
      const a = archiveFromBytes(stored.bytes);
      expect(a.nLeads).toBe(LEADS);
      expect(a.templateLength).toBe(LEADS);
      expect(a.groupStart).toHaveLength(LEADS + 1);
      // Every issue is one row of the issue × lead matrix: cases per lead and (nearly) complete rows.
      expect(groupSizes(a)).toEqual(want.perLead);
      expect(a.templateStart).toHaveLength(want.templates);
      expect(a.templateValues).toHaveLength(inArchive.length * LEADS);
      expect(stored.summary).toMatchObject({ nLeads: LEADS, issues: want.issues, issuesGiven: inArchive.length, members: 4, cases: want.cases, templates: want.templates });
    }
    // The lead-free archive is unchanged: one group serving every lead, templates of the asked length.
    const leadFree = archiveFromBytes((await versionArchive(t.db, versionId, 'corrected'))!.bytes);
    expect(leadFree.nLeads).toBe(0);
    expect(leadFree.templateLength).toBe(30);
  });

  it("the raw per-lead archive holds the stored runs' ensemble means and their errors against the observations", async () => {
    const a = archiveFromBytes((await versionArchive(t.db, versionId, 'raw', 'per-lead'))!.bytes);
    if (a.transform.kind !== 'log') throw new Error('the fit asked for the default log transform');
    const offset = a.transform.offset;
    for (const h of [0, LEADS - 1]) {
      const means: number[] = [];
      let errorSum = 0;
      for (const run of inArchive) {
        const y = scenario.observedFlow[run.issueTimeIndex + 1 + h];
        if (y === null) continue;
        // The ensemble mean in the log space of the errors.
        const logMean = run.members.reduce((sum, m) => sum + Math.log(m.values[m.warmupSteps + h] + offset), 0) / run.members.length;
        means.push(Math.exp(logMean) - offset);
        errorSum += Math.log(y + offset) - logMean;
      }
      const got = Array.from(a.predictor.subarray(a.groupStart[h], a.groupStart[h + 1]));
      means.sort((p, q) => p - q).forEach((m, i) => expect(got[i]).toBeCloseTo(m, 9));
      // The dressing shrinks each error towards the lead's mean error, so their sum is unchanged.
      const err = a.error.subarray(a.groupStart[h], a.groupStart[h + 1]).reduce((sum, e) => sum + e, 0);
      expect(err).toBeCloseTo(errorSum, 8);
    }
  });

  it("the corrected per-lead archive holds what the service serves for the same past run (one feature builder)", async () => {
    const past = inArchive[inArchive.length - 3];
    const i = past.issueTimeIndex;
    // The run as it was issued: its own forecast forcings, which the archive's rows also used.
    const forcings = { precipitation: past.forcings.precipitation, air_temperature: past.forcings.air_temperature };
    const res = await post(runBody(i, (m, k) => past.members[m].values[past.warmupSteps + k], LEADS, { source: 'past-run', forcings }));
    expect(res.statusCode, res.body).toBe(201);
    const served = res.json();
    expect(served.status).toBe('corrected');
    const a = archiveFromBytes((await versionArchive(t.db, versionId, 'corrected', 'per-lead'))!.bytes);
    if (a.transform.kind !== 'log') throw new Error('the fit asked for the default log transform');
    const offset = a.transform.offset;
    for (let h = 0; h < LEADS; h++) {
      if (scenario.observedFlow[i + 1 + h] === null) continue;
      const group = a.predictor.subarray(a.groupStart[h], a.groupStart[h + 1]);
      // The archived case of this issue is the served corrected members' mean (in log space).
      const members = served.ensemble.corrected as { values: number[] }[];
      const mean = Math.exp(members.reduce((sum, m) => sum + Math.log(m.values[h] + offset), 0) / members.length) - offset;
      const nearest = group.reduce((best, x) => (Math.abs(x - mean) < Math.abs(best - mean) ? x : best), Infinity);
      // Served values are rounded to 1e-4.
      expect(Math.abs(nearest - mean)).toBeLessThanOrEqual(1e-4);
    }
  });

  it('records the past runs in the version: archive summaries and residual scores per lead', async () => {
    const modes = (version.archives as { kind: string; leadMode: string; nLeads?: number }[]).map((a) => `${a.kind}/${a.leadMode}`);
    expect(modes).toEqual(['corrected/lead-free', 'raw/lead-free', 'corrected/per-lead', 'raw/per-lead']);
    const r = version.scores.reforecasts;
    expect(r.perLeadArchive).toMatchObject({ stored: true, nLeads: LEADS, issues: expected(inArchive).issues });
    expect(r.byLead).toHaveLength(LEADS);
    // The residual scores count every member at every observed lead; the archive one case per issue.
    expect(r.cases).toBe(expected(inArchive).cases * scenario.memberIds.length);
    expect(r.note).toMatch(/forecast forcings each run was driven by/);
    // The past runs also give the lead-free archive its growth of errors with lead (factors ≥ 1).
    const growth = version.scores.leadGrowth as number[];
    expect(growth).toHaveLength(LEADS);
    for (const g of growth) expect(g).toBeGreaterThanOrEqual(1);
    const leadFree = version.archives.find((a: { kind: string; leadMode: string }) => a.kind === 'corrected' && a.leadMode === 'lead-free');
    expect(leadFree.leadScale).toEqual(growth);
    // And their forecast-forcing deviation paths: one per past run with every lead, reaching LEADS.
    expect(leadFree.forcingPaths).toMatchObject({ leadTimes: LEADS });
    expect(leadFree.forcingPaths.paths).toBeGreaterThan(0);
    expect(leadFree.forcingPaths.paths).toBeLessThanOrEqual(inValidation.length);
    expect(leadFree.forcingPaths.mean).toHaveLength(LEADS);
  });
});

describe('serving chooses the archive by the run\'s lead count', () => {
  const issue = scenario.times.length - 40;
  const sim = (m: number, k: number) => scenario.memberSimulations[scenario.memberIds[m]][issue + 1 + k];

  it('uses the per-lead archive for a run within its lead times', async () => {
    const res = await post(runBody(issue, sim, LEADS));
    expect(res.statusCode, res.body).toBe(201);
    const stored = (await versionArchive(t.db, versionId, 'corrected', 'per-lead'))!;
    expect(res.json().errorArchive).toEqual({ id: stored.id, kind: 'corrected', leadMode: 'per-lead', leadTimes: LEADS, cases: stored.summary.cases, templates: stored.summary.templates, leadGrowth: { source: 'past-runs', note: expect.stringMatching(/past runs at each lead time/) } });
    // Existing fields are unchanged.
    expect(res.json()).toMatchObject({ status: 'corrected', modelVersion: { id: versionId } });
    expect(res.json().leadTimes).toHaveLength(LEADS);
  });

  it('falls back to the lead-free archive for a longer run, and refuses one longer than both', async () => {
    const res = await post(runBody(issue, sim, LEADS + 5, { source: 'longer' }));
    expect(res.statusCode, res.body).toBe(201);
    expect(res.json().errorArchive).toMatchObject({ kind: 'corrected', leadMode: 'lead-free', leadTimes: 30 });
    // Beyond the forcing paths' reach the lead scale widens the errors instead, and the answer says so.
    expect(res.json().errorArchive.leadGrowth.note).toMatch(/widened at each lead time/);
    expect(res.json().leadTimes).toHaveLength(LEADS + 5);

    const tooLong = await post(runBody(issue, sim, 31, { source: 'too-long' }));
    expect(tooLong.statusCode).toBe(422);
    expect(tooLong.json().errors[0]).toMatchObject({ path: 'body.members[0].values' });
    expect(tooLong.json().errors[0].message).toMatch(/covers at most 30/);
  });

  it('prefers the raw per-lead archive in degraded mode, and the lead-free one beyond it', async () => {
    await t.db.query('update model_versions set active = false where gauge_id = $1', [gaugeId]);
    try {
      const short = (await post(runBody(issue - 7, sim, LEADS, { source: 'degraded' }))).json();
      expect(short).toMatchObject({ status: 'degraded', errorArchive: { kind: 'raw', leadMode: 'per-lead', leadTimes: LEADS } });
      const long = (await post(runBody(issue - 7, sim, LEADS + 2, { source: 'degraded-long' }))).json();
      expect(long).toMatchObject({ status: 'degraded', errorArchive: { kind: 'raw', leadMode: 'lead-free', leadTimes: 30 } });
    } finally {
      await t.db.query('update model_versions set active = true where id = $1', [versionId]);
    }
  });
});

describe('forecast forcings of past runs', () => {
  it('refuses an unknown forcing or one of the wrong length, naming it, and stores nothing', async () => {
    const run = scenario.reforecasts()[0];
    const members = run.members.map((m) => ({ id: m.id, values: m.values.slice(m.warmupSteps) }));
    const count = async () => Number((await t.db.query<{ n: number }>('select count(*)::int as n from reforecast_forcings')).rows[0].n);
    const before = await count();
    const post = (forcings: Record<string, number[]>) =>
      t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/reforecasts`, payload: { unit: 'm3/s', runs: [{ issueTime: run.issueTime, members, forcings }] } });
    for (const [forcings, path, message] of [
      [{ snow_depth: new Array(LEADS).fill(1) }, 'body.runs[0].forcings.snow_depth', /unknown forcing/],
      [{ precipitation: [1, 2] }, 'body.runs[0].forcings.precipitation', /has 2 values; the run has 10 lead times/],
      [{ precipitation: new Array(LEADS).fill(-1) }, 'body.runs[0].forcings.precipitation[0]', /cannot be negative/],
    ] as const) {
      const res = await post(forcings as Record<string, number[]>);
      expect(res.statusCode).toBe(422);
      expect(res.headers['content-type']).toContain('application/problem+json');
      expect(res.json().errors[0].path).toBe(path);
      expect(res.json().errors[0].message).toMatch(message);
    }
    expect(await count()).toBe(before);
  });
});

describe('other ways to get per-lead archives', () => {
  it('an uploaded model gets its per-lead archives the same way', async () => {
    // The PyTorch MLP fixture of test/api/models.test.ts (test/fixtures/torch-mlp/make.py, python3-torch 1.13).
    const spec = { version: 1, stepSeconds: 86400, simLags: 9, forcings: [{ name: 'precipitation', lags: 1 }], seasonal: false, leadTime: false, issueError: false };
    const res = await t.as('admin', {
      method: 'POST',
      url: `/gauges/${gaugeId}/models/upload`,
      payload: { label: 'partner MLP', featureSpec: spec, onnxBase64: readFileSync('test/fixtures/torch-mlp/model.onnx').toString('base64'), templateLength: 30, validation: version.periods.validation },
    });
    expect(res.statusCode, res.body).toBe(201);
    const v = res.json();
    const want = expected(inValidation);
    const perLead = v.archives.filter((a: { leadMode: string }) => a.leadMode === 'per-lead');
    expect(perLead.map((a: { kind: string }) => a.kind)).toEqual(['corrected', 'raw']);
    for (const a of perLead) expect(a).toMatchObject({ nLeads: LEADS, cases: want.cases, templates: want.templates });
    const decoded = archiveFromBytes((await versionArchive(t.db, v.id, 'corrected', 'per-lead'))!.bytes);
    expect(groupSizes(decoded)).toEqual(want.perLead);
  });

  it('the raw-archive job builds the raw per-lead archive from every stored past run', async () => {
    const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/raw-archive`, payload: { templateLength: 20 } });
    await runner.drain();
    const job = (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
    expect(job.status, job.error).toBe('succeeded');
    const all = scenario.reforecasts();
    const want = expected(all);
    expect(job.result.perLead).toMatchObject({ nLeads: LEADS, issuesGiven: all.length, issues: want.issues, cases: want.cases, templates: want.templates });
  });

  it('builds no per-lead archive from too few past runs, says why, and serves from the lead-free one', async () => {
    const end = Date.parse(scenario.times[scenario.times.length - 1]) + DAY;
    const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
    const result = await fit({ ...fitBody, calibration: { from: scenario.times[0], to: iso(end - 70 * DAY) }, validation: { from: iso(end - 70 * DAY), to: iso(end) }, activate: true });
    expect(result.archives.perLead).toBeNull();
    expect(result.archives.perLeadNote).toMatch(/at least 20 are needed/);
    expect(result.scores.reforecasts.perLeadArchive).toMatchObject({ stored: false });
    expect(await versionArchive(t.db, result.versionId, 'corrected', 'per-lead')).toBeNull();
    const issue = scenario.times.length - 40;
    const res = await post(runBody(issue - 14, (m, k) => scenario.memberSimulations[scenario.memberIds[m]][issue - 13 + k], LEADS, { source: 'few-past-runs' }));
    expect(res.statusCode, res.body).toBe(201);
    expect(res.json().errorArchive).toMatchObject({ kind: 'corrected', leadMode: 'lead-free' });
  });
});
