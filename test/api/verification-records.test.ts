// GET /gauges/:id/verification from the runs' verification records (migration 016): the answer
// equals the one computed from scratch (every run's JSON answer read and scored again, the
// previous way; test/helpers/verify-from-scratch.ts), for runs stored without a record (built on
// first read) and with one; and a revised observation changes the answer at once, never a stale value.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createPrng } from '../../src/core/prng.ts';
import { buildForecastView } from '../../src/services/forecast-view.ts';
import { buildRunRecord } from '../../src/core/verification/run-record.ts';
import type { ForecastView } from '../../src/services/forecast-view.ts';
import { forgetVerificationAnswers, recordInputFromView } from '../../src/services/verify-runs.ts';
import { insertRun } from '../../src/store/forecasts-repo.ts';
import { getGauge } from '../../src/store/gauges-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { verifyFromScratch } from '../helpers/verify-from-scratch.ts';

let t: TestApp;
const DAY = 86_400_000;
const H = 4;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
const g = 'tarn-beck-at-holloway';
const t0 = Date.parse('2024-05-01T00:00:00Z');
const THRESHOLDS = [
  { label: 'bankfull', value: 14 },
  { label: 'flood', value: 18 },
];
const rng = createPrng(11);
/** Runs as the service built them before storing (id, answer, stage quantiles). */
const built: { id: string; view: ForecastView; percentiles: number[][] }[] = [];
/** The invented river: a seasonal wave with noise. */
const truth = (ms: number) => 12 + 4 * Math.sin(ms / (40 * DAY)) + 2 * Math.sin(ms / (3 * DAY));

beforeAll(async () => {
  t = await makeTestApp();
  const made = await t.as('admin', { method: 'POST', url: '/gauges', payload: { id: g, name: 'Tarn Beck at Holloway', catchmentAreaKm2: 40, timeStep: 'P1D', flowUnit: 'm3/s', thresholds: THRESHOLDS } });
  expect(made.statusCode, made.body).toBe(201);
  // 400 days before the runs (climatology, persistence), and the runs' valid times, with a few gaps.
  const times: string[] = [];
  const values: (number | null)[] = [];
  for (let d = -400; d <= 70 + H; d++) {
    times.push(iso(t0 + d * DAY));
    values.push(d > 0 && d % 13 === 0 ? null : Math.round(truth(t0 + d * DAY) * 1000) / 1000);
  }
  const posted = await t.as('ingest', { method: 'POST', url: `/gauges/${g}/observations`, payload: { unit: 'm3/s', times, values } });
  expect(posted.statusCode, posted.body).toBe(200);
  const gauge = (await getGauge(t.db, g))!;
  for (let i = 0; i < 70; i++) {
    const issueMs = t0 + i * DAY;
    const member = (bias: number, spread: number) => Array.from({ length: H }, (_, k) => Math.max(0, truth(issueMs + (k + 1) * DAY) + bias + spread * rng.normal()));
    const raw = Array.from({ length: 6 }, () => member(1.5, 2.5));
    const corrected = Array.from({ length: 6 }, () => member(0, 1.5));
    const percentiles = Array.from({ length: H }, (_, k) => {
      const col = corrected.map((m) => m[k]).sort((a, b) => a - b);
      return Array.from({ length: 100 }, (_, p) => col[Math.floor((p * col.length) / 100)] * (0.95 + 0.001 * p));
    });
    const exceedance = THRESHOLDS.flatMap((th) => percentiles.map((q) => q.filter((x) => x > th.value).length / 100));
    const anyTime = THRESHOLDS.map((_, j) => Math.min(1, 1.1 * Math.max(...exceedance.slice(j * H, (j + 1) * H))));
    const degraded = i === 20;
    const id = crypto.randomUUID();
    const view = buildForecastView({
      id,
      gauge: i === 30 ? { ...gauge, thresholds: [THRESHOLDS[0]] } : gauge,
      issueTimeMs: issueMs,
      createdAt: new Date().toISOString(),
      source: i % 5 === 0 ? 'second-model' : 'default',
      status: degraded ? 'degraded' : 'corrected',
      degradedReason: degraded ? 'no active model' : null,
      modelVersion: null,
      ...(i % 4 === 0 ? { updating: { status: 'on', observation: null, reason: null } } : {}),
      seed: 1,
      nDraws: 1000,
      attentionLevel: 0.3,
      probs: [0.5],
      nLeads: H,
      memberIds: raw.map((_, m) => `m${m}`),
      raw: Float64Array.from(raw.flat()),
      corrected: degraded ? null : Float64Array.from(corrected.flat()),
      quantiles: percentiles.map((q) => q[50]),
      exceedance: Float64Array.from(i === 30 ? exceedance.slice(0, H) : exceedance),
      anyTime: Float64Array.from(i === 30 ? anyTime.slice(0, 1) : anyTime),
      firstLikelyLead: THRESHOLDS.map(() => null),
      recent: { times: [], observed: [] },
      timings: { featuresMs: 0, inferenceMs: 0, stochasticMs: 0, totalMs: 0 },
    } as unknown as Parameters<typeof buildForecastView>[0]);
    built.push({ id, view: view as ForecastView, percentiles });
    // Stored without a verification record, as runs stored before records existed.
    await insertRun(t.db, {
      id,
      gaugeId: g,
      issueTimeMs: issueMs,
      source: i % 5 === 0 ? 'second-model' : 'default',
      requestHash: id,
      idempotencyKey: null,
      status: degraded ? 'degraded' : 'corrected',
      modelVersionId: null,
      seed: 1,
      input: {},
      output: JSON.stringify(view),
      etag: `"${id}"`,
      summary: [],
      percentiles,
    } as Parameters<typeof insertRun>[1]);
  }
}, 60_000);
afterAll(async () => {
  await t.close();
});

const records = async () => Number((await t.db.query<{ n: number }>('select count(*)::int as n from run_verification_records')).rows[0].n);

/** The answer of the service, and the one computed from scratch, in the same JSON shape. */
async function both(query: string, q: Parameters<typeof verifyFromScratch>[2]) {
  const res = await t.as('read', { method: 'GET', url: `/gauges/${g}/verification${query}` });
  expect(res.statusCode, res.body).toBe(200);
  const v = res.json();
  const ref = JSON.parse(JSON.stringify(await verifyFromScratch(t.db, (await getGauge(t.db, g))!, { ...q, attentionLevel: t.config.ATTENTION_LEVEL })));
  return { v, ref };
}

function expectSame(v: Record<string, any>, ref: Record<string, any>) {
  expect(v.comparison).toEqual(ref.comparison);
  expect(v.advice).toEqual(ref.advice);
  const { references, skipped, ...w } = v.warningScores;
  expect(w).toEqual(ref.warnings);
  expect(skipped).toEqual(ref.skipped);
  expect(references.climatology).toMatch(/^observations within ±15 days/);
  const { note, ...split } = v.byUpdating;
  expect(split).toEqual(ref.byUpdating);
  expect(v.runs).toMatchObject(ref.runs);
  expect(v.degraded.cases).toBe(ref.degradedCases);
}

describe('verification from run records', () => {
  let before: Record<string, any>;

  it('builds the records of runs stored without one on first read, and answers as computed from scratch', async () => {
    expect(await records()).toBe(0);
    const { v, ref } = await both('', {});
    expect(await records()).toBe(70);
    expect(v.runs.total).toBe(70);
    expect(v.comparison.cases.used).toBeGreaterThan(200);
    // The run issued with other thresholds and the degraded one are left out of the warnings.
    expect(v.warningScores.skipped).toEqual({ degraded: 1, thresholdsChanged: 1 });
    expectSame(v, ref);
    before = v;
  });

  it('builds the same record from the answer as it is stored (on posting) as from the stored answer (on first read)', async () => {
    for (const i of [0, 20, 30, 41]) {
      const { id, view, percentiles } = built[i];
      const { rows } = await t.db.query<{ bytes: Uint8Array }>('select bytes from run_verification_records where run_id = $1', [id]);
      expect(Buffer.from(rows[0].bytes).equals(Buffer.from(buildRunRecord(recordInputFromView(view, percentiles), THRESHOLDS)))).toBe(true);
    }
  });

  it('answers the same from the stored records, for a window, a source and a lead range too', async () => {
    // The aggregation runs again from the records (not the answer kept from the first read).
    forgetVerificationAnswers();
    const again = await both('', {});
    expectSame(again.v, again.ref);
    expect(again.v.comparison).toEqual(before.comparison);
    const from = iso(t0 + 10 * DAY);
    const to = iso(t0 + 60 * DAY);
    const narrow = await both(`?from=${from}&to=${to}&minLead=2&maxLead=3&source=default`, { fromMs: Date.parse(from), toMs: Date.parse(to), minLead: 2, maxLead: 3, source: 'default' });
    expect(narrow.v.runs.total).toBe(40);
    expectSame(narrow.v, narrow.ref);
  });

  it('gives a kept answer again only while its runs and observations are unchanged', async () => {
    const first = (await t.as('read', { method: 'GET', url: `/gauges/${g}/verification` })).json();
    const kept = (await t.as('read', { method: 'GET', url: `/gauges/${g}/verification` })).json();
    expect(kept).toEqual(first);
    // The same value posted again changes nothing; the answer is the same.
    const same = await t.as('ingest', { method: 'POST', url: `/gauges/${g}/observations`, payload: { unit: 'm3/s', times: [iso(t0 + 5 * DAY)], values: [Math.round(truth(t0 + 5 * DAY) * 1000) / 1000] } });
    expect(same.statusCode, same.body).toBe(200);
    expect((await t.as('read', { method: 'GET', url: `/gauges/${g}/verification` })).json()).toEqual(first);
  });

  it('follows a revised observation at once: the answer changes and equals the one from scratch', async () => {
    // Revise the observations of days 31 to 35 (valid times of many runs) and fill the gap at day 39.
    const times = [31, 32, 33, 34, 35, 39].map((d) => iso(t0 + d * DAY));
    const values = [30, 2, 25, 1, 22, 19];
    const posted = await t.as('ingest', { method: 'POST', url: `/gauges/${g}/observations`, payload: { unit: 'm3/s', times, values } });
    expect(posted.statusCode, posted.body).toBe(200);
    const { v, ref } = await both('', {});
    expectSame(v, ref);
    expect(v.comparison.cases.used).toBe(before.comparison.cases.used + (ref.comparison.cases.used - before.comparison.cases.used));
    expect(v.comparison.cases.used).toBeGreaterThan(before.comparison.cases.used);
    expect(v.comparison.corrected.crps.crps).not.toBe(before.comparison.corrected.crps.crps);
    const anyTime = (x: Record<string, any>) => x.warningScores.events.find((e: { event: string }) => e.event === 'any-time').sources.stochastic.brier.value;
    expect(anyTime(v)).not.toBe(anyTime(before));
  });

  it('rebuilds the records when the gauge\'s thresholds change, and answers as computed from scratch', async () => {
    const key = async () => (await t.db.query<{ k: string }>('select distinct thresholds_key as k from run_verification_records')).rows.map((r) => r.k);
    expect(await key()).toHaveLength(1);
    const patched = await t.as('admin', { method: 'PATCH', url: `/gauges/${g}`, payload: { thresholds: [{ label: 'bankfull', value: 14 }, { label: 'flood', value: 19 }] } });
    expect(patched.statusCode, patched.body).toBe(200);
    const { v, ref } = await both('', {});
    // Every run was issued with the old thresholds now: none is left in the warnings.
    expect(v.warningScores).toBeNull();
    expect(ref.warnings).toBeNull();
    expect(v.comparison).toEqual(ref.comparison);
    expect(v.comparison.settings.thresholds).toEqual([14, 19]);
    const keys = await key();
    expect(keys).toHaveLength(1);
    expect(keys[0]).toContain('19');
  });
});
