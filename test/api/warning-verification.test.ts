// GET /gauges/:id/verification: the warnings part, on runs stored with known issued
// probabilities, so every number has a hand-checked answer.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/services/caution.ts';
import { buildForecastView } from '../../src/services/forecast-view.ts';
import { crpsEnsemble } from '../../src/core/scores/crps.ts';
import { insertRun } from '../../src/store/forecasts-repo.ts';
import { getGauge } from '../../src/store/gauges-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
const DAY = 86_400_000;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

beforeAll(async () => {
  t = await makeTestApp();
});
afterAll(async () => {
  await t.close();
});

/** Stores a run as the service would, with the test's own members, quantiles and issued probabilities. */
async function storeRun(gaugeId: string, issueMs: number, r: { raw: number[][]; corrected: number[][]; percentiles: number[][]; exceedance: number[]; anyTime: number }) {
  const gauge = (await getGauge(t.db, gaugeId))!;
  const H = r.raw[0].length;
  const id = crypto.randomUUID();
  const view = buildForecastView({
    id,
    gauge,
    issueTimeMs: issueMs,
    createdAt: new Date().toISOString(),
    source: 'default',
    status: 'corrected',
    degradedReason: null,
    modelVersion: null,
    seed: 1,
    nDraws: 1000,
    attentionLevel: 0.3,
    probs: [0.5],
    nLeads: H,
    memberIds: r.raw.map((_, m) => `m${m}`),
    raw: Float64Array.from(r.raw.flat()),
    corrected: Float64Array.from(r.corrected.flat()),
    quantiles: r.percentiles.map((p) => p[Math.floor(p.length / 2)]),
    exceedance: Float64Array.from(r.exceedance),
    anyTime: Float64Array.from([r.anyTime]),
    firstLikelyLead: [null],
    recent: { times: [], observed: [] },
    timings: { featuresMs: 0, inferenceMs: 0, stochasticMs: 0, totalMs: 0 },
  } as unknown as Parameters<typeof buildForecastView>[0]);
  await insertRun(t.db, {
    id,
    gaugeId,
    issueTimeMs: issueMs,
    source: 'default',
    requestHash: id,
    idempotencyKey: null,
    status: 'corrected',
    modelVersionId: null,
    seed: 1,
    input: {},
    output: JSON.stringify(view),
    etag: `"${id}"`,
    summary: [],
    percentiles: r.percentiles,
  } as Parameters<typeof insertRun>[1]);
}

describe('warnings of stored runs, checked by hand', () => {
  const g = 'wren-water-at-osk';
  const t0 = Date.parse('2024-03-01T00:00:00Z');
  // Run A issued t0: leads t0+1d, t0+2d; run B issued t0+1d: leads t0+2d, t0+3d (t0+3d never observed).
  // The stage's 100 quantiles per lead (stored as float32: multiples of 1/32 are exact).
  const q = [Array.from({ length: 100 }, (_, i) => 8 + i / 32), Array.from({ length: 100 }, (_, i) => 9 + i / 32)];
  const obs: [number, number][] = [
    [t0, 9.5], // issue time of A: persistence 9.5
    [t0 + DAY, 11], // A lead 1; issue time of B: persistence 11
    [t0 + 2 * DAY, 10], // A lead 2, B lead 1
  ];

  beforeAll(async () => {
    const made = await t.as('admin', { method: 'POST', url: '/gauges', payload: { id: g, name: 'Wren Water at Osk', catchmentAreaKm2: 12, timeStep: 'P1D', flowUnit: 'm3/s', thresholds: [{ label: 'bankfull', value: 10.5 }] } });
    expect(made.statusCode, made.body).toBe(201);
    // A year of observations before the runs for the seasonal climatology: 10 on every day.
    const times: string[] = [];
    const values: number[] = [];
    for (let d = 365; d >= 1; d--) {
      times.push(iso(t0 - d * DAY));
      values.push(10);
    }
    for (const [tm, v] of obs) {
      times.push(iso(tm));
      values.push(v);
    }
    const posted = await t.as('ingest', { method: 'POST', url: `/gauges/${g}/observations`, payload: { unit: 'm3/s', times, values } });
    expect(posted.statusCode, posted.body).toBe(200);
    await storeRun(g, t0, { raw: [[10, 10], [12, 12]], corrected: [[10, 9], [11, 11]], percentiles: q, exceedance: [0.6, 0.2], anyTime: 0.7 });
    await storeRun(g, t0 + DAY, { raw: [[10, 10], [12, 12]], corrected: [[10, 9], [11, 11]], percentiles: q, exceedance: [0.1, 0.4], anyTime: 0.45 });
  });

  it('scores the probabilities as issued, per lead and at any time, with skill against climatology and persistence', async () => {
    const res = await t.as('read', { method: 'GET', url: `/gauges/${g}/verification` });
    expect(res.statusCode, res.body).toBe(200);
    const v = res.json();
    expect(v.caution).toBe(CAUTION);
    const w = v.warningScores;
    expect(w.runs).toBe(2);
    expect(w.cases).toBe(3);
    const lead = w.events.find((e: { event: string }) => e.event === 'lead-time');
    const any = w.events.find((e: { event: string }) => e.event === 'any-time');
    // Lead-time event flow > 10.5: outcomes 1 (A1, 11), 0 (A2, 10), 0 (B1, 10); issued 0.6, 0.2, 0.1.
    expect(lead.sources.stochastic.brier.value).toBeCloseTo(((0.6 - 1) ** 2 + 0.2 ** 2 + 0.1 ** 2) / 3, 12);
    // Raw members [10, 12] at each lead: half above → 0.5 each.
    expect(lead.sources.raw.brier.value).toBeCloseTo((0.25 + 0.25 + 0.25) / 3, 12);
    // Any time: only run A has every lead observed (max 11 > 10.5): (0.7 − 1)².
    expect(any.sources.stochastic.n).toBe(1);
    expect(any.sources.stochastic.brier.value).toBeCloseTo(0.09, 12);
    // Attention flag at 0.3 on the lead-time event: warned A1 (hit), A2 (0.2, no), B1 (no): 1 hit, 0 false alarms.
    expect(lead.sources.stochastic.attention).toMatchObject({ hits: 1, falseAlarms: 0, misses: 0, correctRejections: 2 });
    // Fitting-period rate: no active model, so the year before the runs (always 10): 0; BS_ref = mean o² = 1/3.
    expect(lead.climatologicalRate).toBe(0);
    expect(lead.sources.stochastic.brierSkill.value).toBeCloseTo(1 - (0.16 + 0.04 + 0.01) / 3 / (1 / 3), 12);
    // CRPS of the quantile sets (ensemble CRPS of the 100 values): A1 q0 vs 11, A2 q1 vs 10, B1 q0 vs 10.
    const crps = [crpsEnsemble(q[0], 11), crpsEnsemble(q[1], 10), crpsEnsemble(q[0], 10)];
    const sk = w.skill.stochastic;
    expect(sk.crps.value).toBeCloseTo((crps[0] + crps[1] + crps[2]) / 3, 12);
    // Persistence: A carries 9.5 (errors 1.5, 0.5), B carries 11 (error 1).
    expect(sk.crpsSkillPersistence.value).toBeCloseTo(1 - (crps[0] + crps[1] + crps[2]) / 3, 12);
    // Climatology: always 10 → CRPS |10 − y|: 1, 0, 0.
    expect(sk.crpsSkillClimatology.value).toBeCloseTo(1 - (crps[0] + crps[1] + crps[2]) / 1, 12);
    expect(w.settings.floodRangeFrom).toEqual({ label: 'bankfull', value: 10.5 });
  });

  it('answers the warnings in CSV rows and a text section', async () => {
    const csv = await t.as('read', { method: 'GET', url: `/gauges/${g}/verification?format=csv` });
    expect(csv.statusCode).toBe(200);
    const lines = csv.body.trim().split('\n').filter((l) => !l.startsWith('#'));
    const row = lines.find((l) => l.startsWith('flow > bankfull (10.5) at the lead time: Brier score (90 % interval),'));
    expect(row, csv.body).toBeDefined();
    expect(Number(row!.split(',')[4])).toBeCloseTo(0.07, 12);
    expect(lines.some((l) => l.startsWith('flow > bankfull (10.5) at the lead time: Brier score (90 % interval) [low],'))).toBe(true);
    expect(lines.some((l) => l.startsWith('CRPS skill vs persistence (90 % interval),'))).toBe(true);
    const text = await t.as('read', { method: 'GET', url: `/gauges/${g}/verification?format=text` });
    expect(text.body).toContain('Warnings: 2 runs, 3 verified lead times');
    expect(text.body).toMatch(/hits \/ false alarms \/ misses\s+1 \/ 2 \/ 0\s+1 \/ 2 \/ 0\s+1 \/ 0 \/ 0/);
  });
});
