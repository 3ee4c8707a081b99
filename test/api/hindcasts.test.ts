import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildArchiveFromReforecasts, createPrng, hindcastCases, runStochasticStage } from '../../src/core/index.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 7, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const DAY = 86_400_000;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
let version: { id: string; periods: { calibration: { from: string; to: string }; validation: { from: string; to: string } } };

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario, { reforecasts: true });
  const job = await fitThroughApi(t, runner, gaugeId);
  version = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${job.result.versionId}` })).json();
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

const start = (payload: object) => t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/hindcasts`, payload });
const get = (jobId: string, query = '') => t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts/${jobId}${query}` });

/** Runs the queue while polling the hindcast; returns every state seen. */
async function drainWatching(jobId: string, onPoll?: (h: Record<string, any>) => Promise<void>) {
  const seen: { status: string; stage: string; percent: number }[] = [];
  let done = false;
  const drained = runner.drain().finally(() => {
    done = true;
  });
  while (!done) {
    const h = (await get(jobId)).json();
    seen.push({ status: h.status, stage: h.stage, percent: h.percent });
    if (onPoll) await onPoll(h);
    await new Promise((r) => setTimeout(r, 25));
  }
  await drained;
  return seen;
}

describe('hindcast jobs', () => {
  let first: Record<string, any>;

  it('runs the pipeline over the validation period in simulation mode, with progress, and stores comparison, size study and advice', async () => {
    const res = await start({ trajectories: 200, sizeStudy: { repeats: 5 } });
    expect(res.statusCode, res.body).toBe(202);
    const job = res.json();
    expect(res.headers.location).toBe(`/gauges/${gaugeId}/hindcasts/${job.id}`);
    expect(job).toMatchObject({ kind: 'hindcast', status: 'queued', href: res.headers.location });

    const seen = await drainWatching(job.id);
    expect(seen.some((s) => s.status === 'running' && s.percent > 0 && s.percent < 100)).toBe(true);
    const h = (await get(job.id)).json();
    expect(h.status, h.error).toBe('succeeded');
    expect(h.percent).toBe(100);
    first = h.result;
    const r = first;
    expect(r).toMatchObject({ mode: 'simulation', modelVersion: { id: version.id }, period: version.periods.validation, horizon: 10, trajectories: 200, correction: 'per-valid-time' });
    expect(r.members).toHaveLength(6);
    expect(r.leadTimes[9]).toBe('P10D');
    // Every issue of the validation period (daily) with its 10 lead times inside the archive.
    expect(r.issues.used).toBeGreaterThan(300);
    const { raw, corrected, stochastic } = r.comparison;
    expect(r.comparison.stochasticFrom).toBe('samples');
    expect(r.comparison.cases.used).toBe(r.cases.verified);
    for (const s of [raw, corrected, stochastic]) expect(s.n).toBe(r.cases.verified);
    expect(raw.members.max).toBe(6);
    expect(stochastic.members.max).toBe(200);
    expect(stochastic.byLead).toHaveLength(10);
    expect(stochastic.brier).toHaveLength(scenario.gauge.thresholds.length);
    // The scenario's raw members are biased: the residual stage improves them where it was validated.
    expect(corrected.crps.crps).toBeLessThan(raw.crps.crps);

    // Size study: each forecast's sizes up to its own count, plus the member count; for exchangeable draws the fair CRPS
    // does not depend on size while the standard CRPS exceeds it by E|X − X'|/(2m) (Ferro 2014),
    // so it falls with size.
    const bySource = Object.fromEntries(r.sizeStudy.map((s: { source: string }) => [s.source, s]));
    expect(bySource.corrected.rows.map((x: { size: number }) => x.size)).toEqual([5, 6]);
    expect(bySource.stochastic.rows.map((x: { size: number }) => x.size)).toEqual([5, 6, 10, 25, 50, 100]);
    const rows = bySource.stochastic.rows as { size: number; crps: number; fairCrps: number; meanWidth: number; alphaIndex: number }[];
    for (let i = 1; i < rows.length; i++) expect(rows[i].crps).toBeLessThan(rows[i - 1].crps);
    // 3 %: room for the subsampling of a few hundred cases (common practice).
    expect(Math.abs(rows[0].fairCrps / rows[rows.length - 1].fairCrps - 1)).toBeLessThan(0.03);
    for (const row of rows) expect(row.meanWidth).toBeGreaterThan(0);

    // Advice with its evidence; both stages stay visible.
    expect(['use-stochastic', 'corrected-ensemble-suffices']).toContain(r.advice.recommendation);
    expect(r.advice.evidence).toMatchObject({ cases: r.cases.verified, alphaCorrected: corrected.alphaIndex, alphaStochastic: stochastic.alphaIndex });
    expect(r.advice.reasons.join(' ')).toMatch(/Reliability: alpha/);
    // Honest about what the model and archive have seen.
    expect(r.overlap.calibration).toBe(0);
    expect(r.warnings.join(' ')).toMatch(/error archives were built from the validation period/);
    expect(r.warnings.join(' ')).toMatch(/Simulation mode/);
    expect(r.warnings.join(' ')).not.toMatch(/calibration period/);
    // Not asked to set the drift-watch level, so it keeps what it has.
    expect(r.driftReference).toMatchObject({ stored: false });
    expect(r.driftReference.note).toMatch(/setDriftLevel/);
    expect(r.errorArchive).toMatchObject({ leadTimes: expect.any(Number) });

    // Warnings: per threshold at each lead and at any time, the same cases as the comparison.
    const w = r.warningScores;
    expect(w.runs).toBe(r.issues.used);
    expect(w.cases).toBe(r.cases.verified);
    expect(w.events).toHaveLength(2 * scenario.gauge.thresholds.length);
    // The CRPS of the warnings' stochastic column is the comparison's (same trajectories, same cases).
    expect(w.skill.stochastic.crps.value).toBeCloseTo(stochastic.crps.crps, 9);
    expect(w.skill.raw.crps.value).toBeCloseTo(raw.crps.crps, 9);
    expect(w.skill.stochastic.crps.low).toBeLessThan(w.skill.stochastic.crps.value);
    expect(w.skill.stochastic.byLead).toHaveLength(10);
    // The climatology is the archive before the validation period; the Brier reference the calibration period.
    expect(w.references.rates).toBe('fitting period');
    expect(w.settings.blockLength).toBe(10);
    expect(r.caution).toMatch(/local authority/);

    const viaJobs = (await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json();
    expect(viaJobs.result.advice).toEqual(r.advice);
  });

  it("gives each issue's output back as JSON and CSV, the same cases the scores came from", async () => {
    const r = first;
    const jobId = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts` })).json().hindcasts.at(-1).id;
    const url = `/gauges/${gaugeId}/hindcasts/${jobId}/issues`;
    const res = await t.as('read', { method: 'GET', url });
    expect(res.statusCode, res.body).toBe(200);
    expect(res.headers.caution).toMatch(/local authority/);
    const body = res.json();
    expect(r.perIssue).toMatchObject({ issues: r.issues.used, href: url });
    expect(body.issues).toHaveLength(r.issues.used);
    expect(body.issues[0].issueTime).toBe(r.issues.first);
    expect(body.probabilities).toEqual([0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95]);
    let absError = 0;
    let cases = 0;
    for (const issue of body.issues) {
      expect(issue.leads).toHaveLength(r.horizon);
      for (const l of issue.leads) {
        for (let q = 1; q < l.quantiles.length; q++) expect(l.quantiles[q]).toBeGreaterThanOrEqual(l.quantiles[q - 1]);
        for (const p of l.exceedance) expect(p >= 0 && p <= 1).toBe(true);
        // The observation is the archive's at the valid time (4 decimals).
        const i = scenario.times.indexOf(l.validTime);
        const y = scenario.observedFlow[i];
        if (y === null || y === undefined) expect(l.observed).toBeNull();
        else {
          expect(l.observed).toBeCloseTo(y, 4);
          absError += Math.abs(l.rawMean - l.observed);
          cases++;
        }
      }
      issue.anyTime.forEach((p: number, j: number) => expect(p).toBeGreaterThanOrEqual(Math.max(...issue.leads.map((l: { exceedance: number[] }) => l.exceedance[j])) - 1e-12));
    }
    // Simulation mode: the raw members are the continuous simulations; their mean at the valid time.
    const l0 = body.issues[3].leads[2];
    const at = scenario.times.indexOf(l0.validTime);
    const simMean = r.members.reduce((sum: number, id: string) => sum + scenario.memberSimulations[id][at], 0) / r.members.length;
    expect(l0.rawMean).toBeCloseTo(simMean, 4);
    // The same verified cases as the summary: the raw ensemble mean's MAE from the issues equals the comparison's.
    expect(cases).toBe(r.cases.verified);
    expect(absError / cases).toBeCloseTo(r.comparison.raw.mean.mae, 3);

    const some = (await t.as('read', { method: 'GET', url: `${url}?from=${body.issues[2].issueTime}&to=${body.issues[5].issueTime}` })).json();
    expect(some.issues.map((x: { issueTime: string }) => x.issueTime)).toEqual(body.issues.slice(2, 5).map((x: { issueTime: string }) => x.issueTime));
    const csv = await t.as('read', { method: 'GET', url: `${url}?format=csv` });
    expect(csv.headers['content-type']).toContain('text/csv');
    const lines = csv.body.trim().split('\n');
    expect(lines).toHaveLength(1 + r.issues.used * r.horizon);
    expect(lines[0]).toMatch(/^issue_time,lead_time,valid_time,observed \(m3\/s\),raw_mean \(m3\/s\),corrected_mean \(m3\/s\),q5 \(m3\/s\),/);
    expect(lines[0].endsWith(',caution')).toBe(true);
  });

  it('serves the main scores as CSV and a text table with the size study', async () => {
    const jobs = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts` })).json().hindcasts;
    const id = jobs[0].id;
    expect(jobs[0]).toMatchObject({ status: 'succeeded', mode: 'simulation', purpose: 'request', href: `/gauges/${gaugeId}/hindcasts/${id}` });
    const csv = await get(id, '?format=csv');
    expect(csv.statusCode).toBe(200);
    expect(csv.headers['content-type']).toContain('text/csv');
    const lines = csv.body.trim().split('\n').filter((l) => !l.startsWith('#'));
    expect(lines[0]).toBe('score,unit,raw,corrected,stochastic,note');
    expect(lines.at(-1)).toMatch(/^caution,,,,,"?Guidance only/);
    expect(csv.headers.caution).toMatch(/responsible local authority/);
    const crps = lines.find((l) => l.startsWith('CRPS,'))!.split(',');
    expect(Number(crps[4])).toBe(first.comparison.stochastic.crps.crps);
    const text = await get(id, '?format=text');
    expect(text.body).toContain(`Stochastic stage: ${first.advice.recommendation}`);
    expect(text.body).toContain('Ensemble-size study, stochastic');
    expect(text.body).toMatch(/alpha index\s+0\.\d+\s+0\.\d+\s+0\.\d+/);
    // The warnings follow in both.
    expect(lines.some((l) => l.startsWith('CRPS skill vs seasonal climatology (90 % interval),'))).toBe(true);
    expect(text.body).toContain('Warnings: ');
    expect(text.body).toContain('Paired differences');
  });

  it('warns when the period overlaps the calibration period, and keeps such a level out of the drift watch', async () => {
    const from = version.periods.calibration.from;
    const to = iso(Date.parse(from) + 60 * DAY);
    const res = await start({ from, to, everySteps: 3, trajectories: 100, sizeStudy: { sources: [] }, setDriftLevel: true });
    expect(res.statusCode, res.body).toBe(202);
    await runner.drain();
    const h = (await get(res.json().id)).json();
    expect(h.status, h.error).toBe('succeeded');
    expect(h.result.overlap.calibration).toBe(h.result.issues.used);
    expect(h.result.warnings.join(' ')).toMatch(/overlaps the model's calibration period/);
    expect(h.result.driftReference).toMatchObject({ stored: false });
    expect(h.result.driftReference.note).toMatch(/overlaps the calibration period/);
    expect(h.result.sizeStudy).toBeNull();
    // 20 issues asked; the first ones lack the model's warm-up (the archive starts there) and are left out, with a warning.
    expect(h.result.issues.given).toBe(20);
    expect(h.result.issues.skippedMissingInputs).toBeGreaterThan(0);
    expect(h.result.issues.used + h.result.issues.skippedMissingInputs).toBe(20);
    expect(h.result.warnings.join(' ')).toMatch(/issues were left out/);
  });

  it('runs in reforecast mode over the stored past runs', async () => {
    const res = await start({ mode: 'reforecast', trajectories: 200, sizeStudy: { repeats: 3 } });
    expect(res.statusCode, res.body).toBe(202);
    await runner.drain();
    const h = (await get(res.json().id)).json();
    expect(h.status, h.error).toBe('succeeded');
    const r = h.result;
    const v = { from: Date.parse(version.periods.validation.from), to: Date.parse(version.periods.validation.to) };
    const stored = scenario.reforecasts().filter((run) => Date.parse(run.issueTime) >= v.from && Date.parse(run.issueTime) < v.to);
    expect(r).toMatchObject({ mode: 'reforecast', horizon: 10, correction: 'per-issue' });
    expect(r.issues.given).toBe(stored.length);
    expect(r.issues.used).toBe(stored.length);
    expect(r.comparison.stochastic.n).toBe(r.cases.verified);
    expect(r.warnings.join(' ')).toMatch(/Reforecast mode/);
  });

  it('corrects a past run exactly as the service corrected it when it was posted', async () => {
    // One stored reforecast, posted as a run with the archived forcings (what the hindcast uses),
    // the same seed and trajectory count: raw, corrected and stochastic must agree.
    const past = scenario.reforecasts().at(-5)!;
    const i = past.issueTimeIndex;
    const w = past.warmupSteps;
    const posted = await t.as('ingest', {
      method: 'POST',
      url: `/gauges/${gaugeId}/runs`,
      payload: {
        issueTime: past.issueTime,
        source: 'replay',
        unit: 'm3/s',
        warmupSteps: w,
        members: past.members.map((m) => ({ id: m.id, values: m.values })),
        forcings: {
          precipitation: scenario.forcings.precipitation.slice(i - w + 1, i + 11),
          air_temperature: scenario.forcings.air_temperature.slice(i - w + 1, i + 11),
        },
        trajectories: 200,
        seed: 4321,
        seasonalWindowDays: 60,
      },
    });
    expect(posted.statusCode, posted.body).toBe(201);
    const run = posted.json();
    const res = await start({ mode: 'reforecast', from: past.issueTime, to: iso(Date.parse(past.issueTime) + DAY), trajectories: 200, seed: 4321, sizeStudy: { sources: [] } });
    expect(res.statusCode, res.body).toBe(202);
    await runner.drain();
    const h = (await get(res.json().id)).json();
    expect(h.status, h.error).toBe('succeeded');
    const c = h.result.comparison;
    const obs = scenario.observedFlow.slice(i + 1, i + 11);
    const observed = obs.map((y, k) => [y, k] as const).filter(([y]) => y !== null) as [number, number][];
    expect(c.cases.used).toBe(observed.length);
    const median = (xs: number[]) => {
      const s = [...xs].sort((a, b) => a - b);
      return s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
    };
    const mae = (at: (k: number) => number) => observed.reduce((a, [y, k]) => a + Math.abs(at(k) - y), 0) / observed.length;
    const q50 = run.quantiles.values[run.quantiles.probabilities.indexOf(0.5)];
    // MAE of the median from the served run (values rounded to 1e-4) against the hindcast's.
    expect(c.raw.median.mae).toBeCloseTo(mae((k) => median(run.ensemble.raw.map((m: { values: number[] }) => m.values[k]))), 3);
    expect(c.corrected.median.mae).toBeCloseTo(mae((k) => median(run.ensemble.corrected.map((m: { values: number[] }) => m.values[k]))), 3);
    expect(c.stochastic.median.mae).toBeCloseTo(mae((k) => q50[k]), 3);
  });

  it('can be cancelled while it runs', async () => {
    const res = await start({ from: scenario.times[30], to: scenario.times[scenario.times.length - 20], trajectories: 5000, sizeStudy: { sources: [] } });
    expect(res.statusCode, res.body).toBe(202);
    const id = res.json().id;
    let asked = false;
    const seen = await drainWatching(id, async (h) => {
      if (!asked && h.status === 'running' && h.percent >= 36) {
        asked = true;
        expect((await t.as('admin', { method: 'POST', url: `/jobs/${id}/cancel` })).statusCode).toBe(202);
      }
    });
    expect(asked).toBe(true);
    expect(seen.some((s) => s.stage === 'stochastic stage and verification')).toBe(true);
    const h = (await get(id)).json();
    expect(h.status).toBe('cancelled');
    expect(h.result).toBeNull();
    expect((await get(id, '?format=csv')).statusCode).toBe(409);
  });

  it('refuses what it cannot run, naming the field', async () => {
    const long = await start({ horizon: 31 });
    expect(long.statusCode).toBe(422);
    expect(long.json().errors[0]).toMatchObject({ path: 'body.horizon' });
    const early = await start({ mode: 'reforecast', from: scenario.times[0], to: scenario.times[30] });
    expect(early.statusCode).toBe(422);
    expect(early.json().errors[0]).toMatchObject({ path: 'body.mode' });
    expect((await start({ version: '999' })).json().errors[0]).toMatchObject({ path: 'body.version' });
    expect((await start({ trajectories: 1_000_000 })).json().errors[0]).toMatchObject({ path: 'body.trajectories' });
    expect((await start({ from: scenario.times[40], to: scenario.times[20] })).json().errors[0]).toMatchObject({ path: 'body.to' });
    expect((await t.as('read', { method: 'POST', url: `/gauges/${gaugeId}/hindcasts`, payload: {} })).statusCode).toBe(403);
    expect((await get('999999')).statusCode).toBe(404);
  });
});

describe('a bundle of residual models in the hindcast (core runHindcast, nModels)', () => {
  it('scores the mean over models as the corrected ensemble and runs the stage on every (model, member), as serving does', () => {
    const I = 3;
    const M = 4;
    const Hh = 3;
    const g = createPrng(3);
    const raw = Float64Array.from({ length: I * M * Hh }, () => 50 + 10 * g.normal());
    const observed = Float64Array.from({ length: I * Hh }, () => 50 + 10 * g.normal());
    const dayOfYear = Uint16Array.from({ length: I * Hh }, (_, k) => 100 + k);
    const archive = buildArchiveFromReforecasts({
      nIssues: 200,
      nLeads: Hh,
      corrected: Float64Array.from({ length: 200 * Hh }, () => 50 + 10 * g.normal()),
      observed: Float64Array.from({ length: 200 * Hh }, () => 50 + 10 * g.normal()),
      dayOfYear: Uint16Array.from({ length: 200 * Hh }, (_, k) => 1 + (k % 365)),
    });
    // Model 0 adds 1, model 1 adds 3: the corrected member is raw + 2.
    const correct = (r: Float64Array, _i: number, out: Float64Array) => {
      for (let j = 0; j < M * Hh; j++) {
        out[j] = r[j] + 1;
        out[M * Hh + j] = r[j] + 3;
      }
    };
    const cases = hindcastCases({ nIssues: I, nMembers: M, nLeads: Hh, nModels: 2, raw, observed, dayOfYear, correct, archive, stochastic: { seed: 9, nDraws: 40 } });
    expect(cases).toHaveLength(I * Hh);
    const c = cases[1 * Hh + 2];
    for (let m = 0; m < M; m++) expect(c.corrected[m]).toBeCloseTo(raw[(1 * M + m) * Hh + 2] + 2, 12);
    const members = new Float64Array(2 * M * Hh);
    correct(raw.subarray(1 * M * Hh, 2 * M * Hh), 1, members);
    const direct = runStochasticStage(archive, { members, nModels: 2, nMembers: M, nLeads: Hh, dayOfYear: Array.from(dayOfYear.subarray(Hh, 2 * Hh)) }, { seed: 10, nDraws: 40, keepTrajectories: true });
    expect(Array.from(c.stochastic as Float64Array)).toEqual(Array.from({ length: 40 }, (_, j) => direct.trajectories![j * Hh + 2]));
  });
});
