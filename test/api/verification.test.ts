import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildForecastView } from '../../src/services/forecast-view.ts';
import { createPrng, crpsGaussian, normalQuantile, watchDrift, type VerificationCase } from '../../src/core/index.ts';
import { settleGaugeStatusRefreshes } from '../../src/services/drift.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario, type ForecastRun } from '../../src/scenario/scenario.ts';
import { insertRun } from '../../src/store/forecasts-repo.ts';
import { getGauge } from '../../src/store/gauges-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const quiet = { info() {}, warn() {}, error() {} } as never;
const DAY = 86_400_000;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
const mid100 = Array.from({ length: 100 }, (_, i) => (i + 0.5) / 100);

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

const createGauge = (id: string, thresholds: { label: string; value: number }[]) =>
  t.as('admin', { method: 'POST', url: '/gauges', payload: { id, name: id, catchmentAreaKm2: 10, timeStep: 'P1D', flowUnit: 'm3/s', thresholds } });

/**
 * Stores a run as the service would after correcting it (the served view, plus the stage's
 * quantiles at the 100 midpoint levels), without running the correction: the forecasts are the
 * test's own, so the scores have a known answer.
 */
async function storeRun(gaugeId: string, issueMs: number, members: { raw: number[][]; corrected: number[][] | null; percentiles: number[][] }, source = 'default') {
  const gauge = (await getGauge(t.db, gaugeId))!;
  const H = members.raw[0].length;
  const M = members.raw.length;
  const flat = (m: number[][]) => Float64Array.from(m.flat());
  const id = crypto.randomUUID();
  const input = {
    id,
    gauge,
    issueTimeMs: issueMs,
    createdAt: new Date().toISOString(),
    source,
    status: members.corrected ? 'corrected' : 'degraded',
    degradedReason: members.corrected ? null : 'test',
    modelVersion: null,
    seed: 1,
    nDraws: 100,
    attentionLevel: 0.3,
    probs: [0.5],
    nLeads: H,
    memberIds: Array.from({ length: M }, (_, m) => `m${m}`),
    raw: flat(members.raw),
    corrected: members.corrected ? flat(members.corrected) : null,
    quantiles: members.percentiles.map((p) => p[49]),
    exceedance: new Float64Array(gauge.thresholds.length * H),
    anyTime: new Float64Array(gauge.thresholds.length),
    firstLikelyLead: gauge.thresholds.map(() => null),
    recent: { times: [], observed: [] },
    timings: { featuresMs: 0, inferenceMs: 0, stochasticMs: 0, totalMs: 0 },
    errorArchive: { id: 'none', kind: 'corrected', leadMode: 'lead-free', leadTimes: H, cases: 0, templates: 0 },
  };
  const view = buildForecastView(input as Parameters<typeof buildForecastView>[0]);
  await insertRun(t.db, {
    id,
    gaugeId,
    issueTimeMs: issueMs,
    source,
    requestHash: id,
    idempotencyKey: null,
    status: members.corrected ? 'corrected' : 'degraded',
    modelVersionId: null,
    seed: 1,
    input: {},
    output: JSON.stringify(view),
    etag: `"${id}"`,
    summary: [],
    percentiles: members.percentiles,
  });
}

const postObservations = (gaugeId: string, times: string[], values: (number | null)[]) =>
  t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/observations`, payload: { unit: 'm3/s', times, values } });

const verify = (gaugeId: string, query = '') => t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification${query}` });

describe('verification of stored runs: a hand-checked case', () => {
  const g = 'hand-brook';
  const t0 = Date.parse('2024-01-01T00:00:00Z');
  // The stage's 100 midpoint quantiles of N(10, 1).
  const normal10 = mid100.map((p) => 10 + normalQuantile(p));

  beforeAll(async () => {
    expect((await createGauge(g, [{ label: '2-year flow', value: 10.5 }])).statusCode).toBe(201);
    // Run 1 (corrected), run 2 (degraded: no corrected ensemble), run 3 (never observed).
    await storeRun(g, t0, { raw: [[10, 10], [11, 11]], corrected: [[9, 9], [11, 11]], percentiles: [normal10, normal10] });
    await storeRun(g, t0 + DAY, { raw: [[10, 10], [11, 11]], corrected: null, percentiles: [normal10, normal10] });
    await storeRun(g, t0 + 4 * DAY, { raw: [[10, 10], [11, 11]], corrected: [[9, 9], [11, 11]], percentiles: [normal10, normal10] });
  });

  it('gives no cases before any observation', async () => {
    const res = await verify(g);
    expect(res.statusCode, res.body).toBe(200);
    const v = res.json();
    expect(v.runs).toMatchObject({ total: 3, verified: 0, corrected: 2, degraded: 1 });
    expect(v.comparison.cases.used).toBe(0);
    expect(v.advice.recommendation).toBe('insufficient-data');
  });

  it('matches lead times with observations by valid time and scores raw, corrected and stochastic side by side', async () => {
    // Valid times: run 1 → Jan 2, Jan 3; run 2 → Jan 3, Jan 4 (not observed); run 3 → Jan 6, 7 (not observed).
    expect((await postObservations(g, [iso(t0 + DAY), iso(t0 + 2 * DAY)], [10, 10])).statusCode).toBe(200);
    const v = (await verify(g)).json();
    expect(v.runs).toMatchObject({ total: 3, verified: 2, corrected: 2, degraded: 1, sources: { default: 3 } });
    expect(v.comparison.cases.used).toBe(2);
    // The degraded run's one observed lead is counted, not scored.
    expect(v.degraded).toMatchObject({ runs: 1, cases: 1 });
    expect(v.degraded.handling).toMatch(/left out of all three columns/);
    expect(v.comparison.stochasticFrom).toBe('quantiles');
    const { raw, corrected, stochastic } = v.comparison;
    // CRPS: obs 0, members [0, 1] → 0.25 and [−1, 1] → 0.5 (properscoring 0.1, properscoring/tests/test_crps.py, test_crps_toy_examples; shifted by 10).
    expect(raw.crps.crps).toBeCloseTo(0.25, 12);
    expect(corrected.crps.crps).toBeCloseTo(0.5, 12);
    // Stochastic: 100 midpoint quantiles of N(10, 1) against the Gaussian closed form at y = μ,
    // 0.2336950 (Gneiting et al. 2005 closed form; properscoring 0.1 README: crps_gaussian(0, 0, 1) = 0.23369497725510913); the 100-point quantile ensemble is within 1e-3
    // relative (scipy 1.10.1 / numpy 1.24.2 give 0.2337627 for it).
    expect(Math.abs(stochastic.crps.crps / crpsGaussian(10, 1, 10) - 1)).toBeLessThan(1e-3);
    expect(stochastic.crps.crps).toBeCloseTo(0.2337627, 4);
    // Median of [10, 11] is 10.5 → MAE 0.5; of [9, 11] is 10 → 0 (by hand).
    expect(raw.median.mae).toBeCloseTo(0.5, 12);
    expect(corrected.median.mae).toBeCloseTo(0, 12);
    // Brier for flow > 10.5: probability 0.5 for an event that did not happen → 0.25 (by hand);
    // stochastic: 31 of the 100 quantiles exceed 10.5 (Φ(0.5) = 0.6915) → 0.31² = 0.0961.
    expect(raw.brier[0].brier).toBeCloseTo(0.25, 12);
    expect(corrected.brier[0].brier).toBeCloseTo(0.25, 12);
    expect(stochastic.brier[0].brier).toBeCloseTo(0.0961, 12);
    // Plot data are there for all three.
    for (const s of [raw, corrected, stochastic]) {
      expect(s.pitHistogram.counts.reduce((a: number, b: number) => a + b, 0)).toBe(2);
      expect(s.qq.uniform).toHaveLength(2);
      expect(s.brier[0].diagram.length).toBe(10);
      expect(s.byLead.map((l: { leadTime: string; n: number }) => [l.leadTime, l.n])).toEqual([['P1D', 1], ['P2D', 1]]);
    }
    expect(v.advice.recommendation).toBe('insufficient-data');
    expect(v.advice.evidence).toMatchObject({ cases: 2 });
  });

  it('keeps only the asked lead times and source', async () => {
    const v = (await verify(g, '?minLead=2&maxLead=2')).json();
    expect(v.comparison.cases.used).toBe(1);
    expect(v.comparison.cases.outsideLeadRange).toBe(1);
    expect(v.leadRange).toEqual({ min: 2, max: 2 });
    expect(v.degraded.cases).toBe(0);
    const none = (await verify(g, '?source=other')).json();
    expect(none.runs.total).toBe(0);
    const early = (await verify(g, `?to=${iso(t0 + DAY)}`)).json();
    expect(early.runs.total).toBe(1);
  });

  it('answers as CSV (one row per score) and as a plain-text table', async () => {
    const csv = await verify(g, '?format=csv');
    expect(csv.headers['content-type']).toContain('text/csv');
    const lines = csv.body.trim().split('\n').filter((l) => !l.startsWith('#'));
    expect(lines[0]).toBe('score,unit,raw,corrected,stochastic,note');
    expect(lines.at(-1)).toMatch(/^caution,,,,,"?Guidance only/);
    expect(csv.headers.caution).toMatch(/responsible local authority/);
    const crps = lines.find((l) => l.startsWith('CRPS,'))!.split(',');
    expect(Number(crps[2])).toBeCloseTo(0.25, 12);
    expect(Number(crps[3])).toBeCloseTo(0.5, 12);
    expect(lines.find((l) => l.startsWith('"Brier score, flow > 10.5"'))).toBeDefined();
    expect(lines.find((l) => l.startsWith('spread class,'))).toBeDefined();
    const text = await verify(g);
    expect(text.headers['content-type']).toContain('application/json');
    const plain = await t.as('read', { method: 'GET', url: `/gauges/${g}/verification`, headers: { accept: 'text/plain' } });
    expect(plain.headers['content-type']).toContain('text/plain');
    expect(plain.body).toMatch(/^CRPS \(m3\/s\)\s+0\.2500\s+0\.5000\s+0\.233\d/m);
    expect(plain.body).toContain('Stochastic stage: insufficient-data');
    expect(plain.body).toContain('degraded runs left out');
  });

  it('refuses bad queries naming the field, and unknown gauges', async () => {
    const bad = await verify(g, '?minLead=0&format=xml');
    expect(bad.statusCode).toBe(422);
    const paths = bad.json().errors.map((e: { path: string }) => e.path);
    expect(paths).toContain('query.minLead');
    expect(paths).toContain('query.format');
    expect((await verify(g, '?minLead=3&maxLead=2')).json().errors[0].path).toBe('query.maxLead');
    expect((await verify('no-such-gauge')).statusCode).toBe(404);
    expect((await t.as(null, { method: 'GET', url: `/gauges/${g}/verification` })).statusCode).toBe(401);
  });
});

describe('verification of stored runs: calibrated, too narrow and too wide forecasts', () => {
  // Invented data with a known answer: observation ~ N(μ_t, σ²). The stochastic stage's quantiles
  // are exactly N(μ_t, σ²) (a perfectly calibrated forecast); the raw members are drawn with 0.3 σ
  // (too narrow on purpose), the corrected ones with 3 σ (too wide on purpose).
  const g = 'synthetic-brook';
  const t0 = Date.parse('2023-01-01T00:00:00Z');
  const nRuns = 300;
  const H = 2;
  const M = 20;
  const sigma = 10;
  const mu = (day: number) => 100 + 30 * Math.sin((2 * Math.PI * day) / 365.25);

  beforeAll(async () => {
    expect((await createGauge(g, [{ label: '10-year flow', value: 130 }])).statusCode).toBe(201);
    const rng = createPrng(11);
    const obsTimes: string[] = [];
    const obs: number[] = [];
    for (let d = 1; d <= nRuns + H; d++) {
      obsTimes.push(iso(t0 + d * DAY));
      obs.push(mu(d) + sigma * rng.normal());
    }
    for (let i = 0; i < nRuns; i++) {
      const days = Array.from({ length: H }, (_, k) => i + k + 1);
      const draw = (scale: number) => Array.from({ length: M }, () => days.map((d) => mu(d) + scale * sigma * rng.normal()));
      await storeRun(g, t0 + i * DAY, { raw: draw(0.3), corrected: draw(3), percentiles: days.map((d) => mid100.map((p) => mu(d) + sigma * normalQuantile(p))) });
    }
    expect((await postObservations(g, obsTimes, obs)).statusCode).toBe(200);
  });

  it('classes the calibrated stage calibrated, the narrow ensemble under-dispersive and the wide one over-dispersive, and advises the stage', async () => {
    const v = (await verify(g)).json();
    const { raw, corrected, stochastic } = v.comparison;
    expect(v.comparison.cases.used).toBe(nRuns * H);
    // Calibrated: alpha near 1 and 90 % coverage near nominal (tolerances: common practice for 600 cases).
    expect(stochastic.alphaIndex).toBeGreaterThan(0.9);
    expect(Math.abs(stochastic.spread.coverage90 - 0.9)).toBeLessThan(0.05);
    expect(stochastic.spread.class).toBe('calibrated');
    expect(raw.spread.class).toBe('under-dispersive');
    // Calibrated values are alpha 1 (Renard et al. 2010), 12·var(PIT) 1 (uniform PIT) and 90 % coverage 0.9;
    // the bounds below sit well away from them for 0.3 σ and 3 σ ensembles (margins: common practice).
    expect(raw.alphaIndex).toBeLessThan(0.8);
    expect(raw.pit.varianceRatio).toBeGreaterThan(1.5);
    expect(corrected.pit.varianceRatio).toBeLessThan(0.5);
    expect(corrected.spread.class).toBe('over-dispersive');
    expect(corrected.spread.coverage90).toBeGreaterThan(0.97);
    // The stage improves on the over-dispersive corrected ensemble: better reliability and CRPS.
    expect(stochastic.crps.crps).toBeLessThan(corrected.crps.crps);
    expect(v.advice.recommendation).toBe('use-stochastic');
    expect(v.advice.evidence.alphaCorrected).toBe(corrected.alphaIndex);
    expect(v.advice.evidence.alphaStochastic).toBe(stochastic.alphaIndex);
    expect(v.advice.evidence.spreadCorrected).toBe('over-dispersive');
    expect(v.advice.reasons.some((r: string) => /Rule of thumb/.test(r))).toBe(true);
    // Reliability-diagram data for the threshold: bins of forecast probability with observed frequency.
    const diagram = stochastic.brier[0].diagram;
    expect(diagram.reduce((a: number, b: { count: number }) => a + b.count, 0)).toBe(nRuns * H);
  });
});

describe('the scenario: stored runs, later observations, drift', () => {
  const scenario = buildScenario({ seed: 5, years: 4, members: 6 });
  const gaugeId = scenario.gauge.id;
  const n = scenario.times.length;
  // Runs issued on each of the last 50 days whose horizon is still in the archive; their
  // observations are withheld at first and posted later.
  const firstIssue = n - 61;
  const lastIssue = n - 12;
  const withheldFrom = firstIssue + 1;

  const runBody = (run: ForecastRun) => scenarioRunBody(run, { trajectories: 500 });

  beforeAll(async () => {
    const observedFlow = scenario.observedFlow.map((v, i) => (i >= withheldFrom ? null : v));
    // With reforecasts, the drift watch's level comes from real (re)forecasts of the validation period.
    await loadScenarioArchive(injectSend(t), { ...scenario, observedFlow }, { reforecasts: true });
    await fitThroughApi(t, runner, gaugeId);
    for (let i = firstIssue; i <= lastIssue; i++) {
      const res = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: runBody(scenario.forecastRun(i)) });
      expect(res.statusCode, res.body).toBe(201);
    }
  });

  const status = async () => {
    await settleGaugeStatusRefreshes(t.db);
    const overview = (await t.as('read', { method: 'GET', url: '/overview' })).json();
    const gauge = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}` })).json();
    const metrics = (await t.as('read', { method: 'GET', url: '/metrics' })).body;
    const line = metrics.split('\n').find((l) => l.startsWith(`sft_gauge_drifting{gauge="${gaugeId}"}`));
    return { overview: overview.gauges.find((x: { id: string }) => x.id === gaugeId).status, gauge, metric: line ? Number(line.split(' ').pop()) : null };
  };

  it('has nothing to verify until observations arrive', async () => {
    const v = (await verify(gaugeId)).json();
    expect(v.runs.total).toBe(lastIssue - firstIssue + 1);
    expect(v.comparison.cases.used).toBe(0);
    const s = await status();
    expect(s.overview).toBe('insufficient-data');
    expect(s.gauge.status).toBe('insufficient-data');
  });

  it('verifies the runs once observations are posted, and the drift watch measures the version\'s validation level', async () => {
    const times = scenario.times.slice(withheldFrom);
    const res = await postObservations(gaugeId, times, scenario.observedFlow.slice(withheldFrom));
    expect(res.statusCode).toBe(200);
    const v = (await verify(gaugeId)).json();
    expect(v.runs.verified).toBe(lastIssue - firstIssue + 1);
    const missing = scenario.observedFlow.slice(withheldFrom).filter((x) => x === null).length;
    expect(v.comparison.cases.used).toBeGreaterThan((lastIssue - firstIssue + 1) * 10 - missing * 10 - 1);
    expect(v.comparison.stochastic.n).toBe(v.comparison.cases.used);
    expect(v.comparison.raw.members.max).toBe(6);
    expect(v.comparison.stochastic.members.max).toBe(100);
    expect(['use-stochastic', 'corrected-ensemble-suffices']).toContain(v.advice.recommendation);
    expect(v.advice.evidence.cases).toBe(v.comparison.cases.used);

    // No level yet: the watch starts a hindcast over the version's validation period.
    let s = await status();
    expect(s.gauge.status).toBe('insufficient-data');
    expect(s.gauge.drift.reasons.join(' ')).toMatch(/Hindcast job \d+ \(queued\)/);
    await runner.drain();
    const jobs = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts` })).json().hindcasts;
    const ref = jobs.find((j: { purpose: string }) => j.purpose === 'drift-reference');
    expect(ref.status, ref.error).toBe('succeeded');
    s = await status();
    // From the stored reforecasts of the validation period (real forecasts, with forcing errors);
    // it overlaps the held-out block the stage's archives came from, which the reasons say.
    expect(s.gauge.drift.evidence.reference).toMatchObject({ jobId: ref.id, mode: 'reforecast' });
    expect(['ok', 'drifting']).toContain(s.gauge.status);
    expect(s.gauge.drift.reasons.join(' ')).toMatch(/measured in-sample: on the period from which the stage's error archives were built/);
    // Each run counts once in the coverage test (its lead times share their errors).
    expect(s.gauge.drift.evidence.testedUnits).toBe(lastIssue - firstIssue + 1);
  });

  it('takes a fairer level from reforecasts of a period the model has not seen, and then says ok', async () => {
    // The operator stores the recent runs' raw members as reforecasts and sets the level from them.
    const runs = Array.from({ length: lastIssue - firstIssue + 1 }, (_, k) => scenario.forecastRun(firstIssue + k));
    const stored = await t.as('ingest', {
      method: 'POST',
      url: `/gauges/${gaugeId}/reforecasts`,
      payload: { unit: 'm3/s', runs: runs.map((r) => ({ issueTime: r.issueTime, members: r.members.map((m) => ({ id: m.id, values: m.values.slice(m.warmupSteps) })) })) },
    });
    expect(stored.statusCode, stored.body).toBeLessThan(300);
    const started = await t.as('admin', {
      method: 'POST',
      url: `/gauges/${gaugeId}/hindcasts`,
      payload: { mode: 'reforecast', from: runs[0].issueTime, to: scenario.times[lastIssue + 1], trajectories: 500, setDriftLevel: true, sizeStudy: { sources: [] } },
    });
    expect(started.statusCode, started.body).toBe(202);
    await runner.drain();
    const h = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts/${started.json().id}` })).json();
    expect(h.status, h.error).toBe('succeeded');
    expect(h.result.driftReference).toMatchObject({ stored: true });
    const s = await status();
    expect(s.gauge.drift.evidence.reference).toMatchObject({ jobId: started.json().id, mode: 'reforecast' });
    expect(s.gauge.status).toBe('ok');
    expect(s.overview).toBe('ok');
    expect(s.metric).toBe(0);
  });

  it('flags drift after the observations shift, in the overview, the gauge and /metrics', async () => {
    const times = scenario.times.slice(withheldFrom);
    const shifted = scenario.observedFlow.slice(withheldFrom).map((x) => (x === null ? null : Math.round(x * 1.8 * 1e4) / 1e4));
    expect((await postObservations(gaugeId, times, shifted)).statusCode).toBe(200);
    const s = await status();
    expect(s.gauge.status).toBe('drifting');
    expect(s.gauge.drift.reasons.join(' ')).toMatch(/coverage|CRPS/);
    expect(s.gauge.drift.evidence.cases).toBeGreaterThanOrEqual(30);
    expect(s.overview).toBe('drifting');
    expect(s.metric).toBe(1);
  });
});

describe('drift coverage test with runs as units (core watchDrift, testUnits)', () => {
  it('counts each issue once: 40 runs of 5 lead times, 28 runs covered throughout', () => {
    const values = Array.from({ length: 99 }, (_, i) => 10 + (i - 49) / 10 + 0.05);
    const probs = Float64Array.from({ length: 99 }, (_, i) => (i + 0.5) / 99);
    const cases: VerificationCase[] = [];
    for (let i = 0; i < 40; i++) {
      for (let k = 0; k < 5; k++) {
        // Inside the band (PIT near 0.5) for 28 runs, far above every value (PIT 1) for 12.
        cases.push({ lead: k, observation: i < 28 ? 10 : 100, raw: [], corrected: [], stochasticQuantiles: { probs, values }, issueTime: `issue-${i}`, validTime: iso(Date.UTC(2024, 0, 1 + i + k)) });
      }
    }
    const reference = { coverage90: 0.95, crps: 1000 };
    const byIssue = watchDrift(cases, reference, { testUnits: 'issues' });
    const byCase = watchDrift(cases, reference);
    expect(byIssue.evidence.coverage90).toBeCloseTo(0.7, 12);
    expect(byIssue.evidence.testedUnits).toBe(40);
    expect(byCase.evidence.testedUnits).toBe(200);
    // One-sided binomial P(X ≤ 28 | 40, 0.9) and P(X ≤ 140 | 200, 0.9), scipy 1.10.1 binom.cdf.
    expect(Math.abs(byIssue.evidence.coveragePValue! / 0.0003808342667363419 - 1)).toBeLessThan(1e-9);
    expect(Math.abs(byCase.evidence.coveragePValue! / 3.700520420614742e-15 - 1)).toBeLessThan(1e-9);
    expect(() => watchDrift(cases.map((c) => ({ ...c, issueTime: undefined })), reference, { testUnits: 'issues' })).toThrow(/issueTime/);
  });
});
