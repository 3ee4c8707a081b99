import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { flowAtStage } from '../../src/core/rating/flow-at-stage.ts';
import type { RatingSegment } from '../../src/core/rating/rating-curve.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend, scenarioRunBody } from '../helpers/scenario-send.ts';

// Water levels: rating curve versions, thresholds given as levels, and runs that show both units.
let t: TestApp;
const scenario = buildScenario({ seed: 23, years: 3, members: 4 });
const gaugeId = scenario.gauge.id;
const last = scenario.times.length - 1;
const url = `/gauges/${gaugeId}/rating-curves`;

// Two segments continuous at 2 m: Q = 15·h^1.8 below, Q = a2·(h − 0.5)^1.5 above, a2 = 15·2^1.8 / 1.5^1.5.
const older: RatingSegment[] = [
  { fromStage: 0, toStage: 2, a: 15, b: 1.8, h0: 0 },
  { fromStage: 2, toStage: 8, a: (15 * 2 ** 1.8) / 1.5 ** 1.5, b: 1.5, h0: 0.5 },
];
// A later version after the bed moved: the same shape 0.2 m higher.
const newer: RatingSegment[] = older.map((s) => ({ ...s, fromStage: s.fromStage + 0.2, toStage: s.toStage + 0.2, h0: s.h0 + 0.2 }));
const v1From = '2000-01-01T00:00:00Z';
const v2From = scenario.times[last - 15];

beforeAll(async () => {
  t = await makeTestApp();
  await loadScenarioArchive(injectSend(t), scenario);
  // No model: runs are corrected in degraded mode on the raw-error archive, which is enough here.
  const job = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/raw-archive`, payload: { templateLength: 20 } });
  expect(job.statusCode).toBe(202);
  const runner = new JobRunner(t.db, jobHandlers, { info() {}, warn() {}, error() {} } as never, 60_000);
  await runner.drain();
  await runner.stop();
});
afterAll(async () => t?.close());

describe('rating curves and thresholds in water level', () => {
  it('refuses a level threshold while the gauge has no rating curve, naming it', async () => {
    const res = await t.as('admin', { method: 'PATCH', url: `/gauges/${gaugeId}`, payload: { thresholds: [{ label: 'bankfull', level: 2.5 }] } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors).toEqual([{ path: 'body.thresholds[0].level', message: expect.stringMatching(/"bankfull" is a water level \(2.5 m\) but the gauge has no rating curve/) }]);
  });

  it('refuses a threshold with both or neither unit', async () => {
    const res = await t.as('admin', { method: 'PATCH', url: `/gauges/${gaugeId}`, payload: { thresholds: [{ label: 'x', value: 5, level: 1 }] } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].path).toBe('body.thresholds[0].value');
  });

  it('names every bad segment field at once and writes nothing', async () => {
    const bad = [
      { fromStage: 0, toStage: 2, a: -1, b: 1.8, h0: 0.5 },
      { fromStage: 2.5, toStage: 3, a: 10, b: 0, h0: 0 },
    ];
    const res = await t.as('admin', { method: 'POST', url, payload: { validFrom: v1From, segments: bad } });
    expect(res.statusCode).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.json().errors.map((e: { path: string }) => e.path)).toEqual(['body.segments[0].a', 'body.segments[0].h0', 'body.segments[1].b', 'body.segments[1].fromStage']);
    expect((await t.as('read', { method: 'GET', url })).json().versions).toEqual([]);
  });

  it('refuses a flow jump at a join beyond the tolerance', async () => {
    const jumpy = [older[0], { ...older[1], a: older[1].a * 1.05 }];
    const res = await t.as('admin', { method: 'POST', url, payload: { validFrom: v1From, segments: jumpy } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0]).toMatchObject({ path: 'body.segments[1].a', message: expect.stringMatching(/jumps at the join at stage 2/) });
  });

  it('stores a version, answers a repeat with it, and refuses another curve at the same time', async () => {
    const res = await t.as('admin', { method: 'POST', url, payload: { validFrom: v1From, segments: older, note: 'gaugings 1998–2003' } });
    expect(res.statusCode, res.body).toBe(201);
    const curve = res.json();
    expect(curve).toMatchObject({ validFrom: '2000-01-01T00:00:00Z', units: { stage: 'm', flow: 'm3/s' }, stageRange: { from: 0, to: 8 }, joinTolerance: 0.01 });
    expect(curve.joins).toHaveLength(1);
    expect(curve.joins[0].relativeJump).toBeLessThan(1e-9);
    // 15·2^1.8 = 52.2337… at the join and a2·7.5^1.5 at the top (worked by hand: 2^1.8 = 3.48220).
    expect(curve.joins[0].flowBelow).toBeCloseTo(52.233, 3);
    expect(curve.flowRange.to).toBeCloseTo(older[1].a * 7.5 ** 1.5, 3);
    const again = await t.as('admin', { method: 'POST', url, payload: { validFrom: v1From, segments: older, note: 'gaugings 1998–2003' } });
    expect(again.statusCode).toBe(200);
    const other = await t.as('admin', { method: 'POST', url, payload: { validFrom: v1From, segments: newer } });
    expect(other.statusCode).toBe(409);
    expect(other.json().errors[0].path).toBe('body.validFrom');
  });

  it('takes thresholds in level and in flow and shows both units on the gauge', async () => {
    const res = await t.as('admin', {
      method: 'PATCH',
      url: `/gauges/${gaugeId}`,
      payload: { thresholds: [{ label: 'action', value: 20 }, { label: 'bankfull', level: 2.5 }] },
    });
    expect(res.statusCode, res.body).toBe(200);
    const g = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}` })).json();
    expect(g.ratingCurve).toMatchObject({ validFrom: '2000-01-01T00:00:00Z', versions: 1 });
    const [action, bankfull] = g.thresholds;
    // 2.5 m on the upper segment: a2·2^1.5 (worked by hand from the equation).
    expect(bankfull).toMatchObject({ label: 'bankfull', given: 'level', level: 2.5 });
    expect(bankfull.flow).toBeCloseTo(older[1].a * 2 ** 1.5, 9);
    expect(bankfull.value).toBe(bankfull.flow);
    // 20 m³/s on the lower segment: h = (20/15)^(1/1.8) = 1.17343 m (worked by hand).
    expect(action).toMatchObject({ label: 'action', given: 'flow', flow: 20, value: 20 });
    expect(action.level).toBeCloseTo(1.173, 3);
  });

  it('refuses a level outside the curve and a version whose range leaves out a level threshold, naming the threshold', async () => {
    const outside = await t.as('admin', { method: 'PATCH', url: `/gauges/${gaugeId}`, payload: { thresholds: [{ label: 'record', level: 9.5 }] } });
    expect(outside.statusCode).toBe(422);
    expect(outside.json().errors).toEqual([{ path: 'body.thresholds[0].level', message: expect.stringMatching(/"record" \(9.5 m\) lies outside the stage range 0–8 m/) }]);
    const short = [{ ...older[0], toStage: 2 }, { ...older[1], toStage: 2.4 }];
    const res = await t.as('admin', { method: 'POST', url, payload: { validFrom: v2From, segments: short } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].message).toMatch(/"bankfull" \(2.5 m\) lies outside the stage range 0–2.4 m/);
    expect((await t.as('read', { method: 'GET', url })).json().versions).toHaveLength(1);
  });

  it('converts with the version in force at each run\'s issue time and gives the quantiles as levels', async () => {
    const added = await t.as('admin', { method: 'POST', url, payload: { validFrom: v2From, segments: newer } });
    expect(added.statusCode, added.body).toBe(201);
    const list = (await t.as('read', { method: 'GET', url })).json();
    expect(list.versions.map((v: { validFrom: string }) => v.validFrom)).toEqual(['2000-01-01T00:00:00Z', v2From]);

    for (const [index, segments, validFrom] of [
      [last - 20, older, '2000-01-01T00:00:00Z'],
      [last - 12, newer, v2From],
    ] as const) {
      const res = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: scenarioRunBody(scenario.forecastRun(index), { trajectories: 200 }) });
      expect(res.statusCode, res.body).toBe(201);
      const f = res.json();
      expect(f.ratingCurve).toEqual({ validFrom, beforeFirst: false, stageUnit: 'm' });
      const bankfull = f.thresholds.find((x: { label: string }) => x.label === 'bankfull');
      expect(bankfull).toMatchObject({ given: 'level', level: 2.5 });
      expect(bankfull.flow).toBeCloseTo(flowAtStage(segments, 2.5), 9);
      expect(bankfull.value).toBe(bankfull.flow);
      // Each quantile's level gives its flow back through the curve (levels rounded to the millimetre).
      const values = f.quantiles.values as number[][];
      const levels = f.quantiles.levels as (number | null)[][];
      expect(levels).toHaveLength(values.length);
      for (let q = 0; q < values.length; q++) {
        for (let k = 0; k < values[q].length; k++) {
          const level = levels[q][k];
          expect(level).not.toBeNull();
          const slope = Math.abs(flowAtStage(segments, level! + 0.0005) - flowAtStage(segments, level!)) + 1e-6;
          expect(Math.abs(flowAtStage(segments, level!) - values[q][k])).toBeLessThanOrEqual(slope + 1e-4);
        }
      }
      const text = await t.as('read', { method: 'GET', url: `/forecasts/${f.id}?format=text` });
      expect(text.body).toMatch(/P>bankfull \([\d.]+ m3\/s = 2.5 m\)/);
      expect(text.body).toContain('median level (m)');
    }
  });

  it('keeps the last version while thresholds are levels, and drops a version otherwise', async () => {
    expect((await t.as('admin', { method: 'DELETE', url: `${url}/${v2From}` })).statusCode).toBe(204);
    const res = await t.as('admin', { method: 'DELETE', url: `${url}/2000-01-01T00:00:00Z` });
    expect(res.statusCode).toBe(409);
    expect(res.json().detail).toMatch(/"bankfull" are water levels and need a rating curve/);
    expect((await t.as('read', { method: 'GET', url })).json().versions).toHaveLength(1);
  });

  it('is in the OpenAPI document: the curve body and answer, thresholds in flow or level', async () => {
    const doc = (await t.app.inject({ method: 'GET', url: '/openapi.json' })).json();
    const path = doc.paths['/gauges/{id}/rating-curves'];
    expect(Object.keys(path).sort()).toEqual(['get', 'post']);
    expect(Object.keys(path.post.requestBody.content['application/json'].schema.properties)).toEqual(expect.arrayContaining(['validFrom', 'segments', 'joinTolerance']));
    const ok = Object.keys(path.post.responses).find((code) => code.startsWith('2'))!;
    expect(Object.keys(path.post.responses[ok].content['application/json'].schema.properties)).toEqual(expect.arrayContaining(['stageRange', 'flowRange', 'joins']));
    expect(doc.paths['/gauges/{id}/rating-curves/{validFrom}'].delete).toBeTruthy();
    const threshold = doc.paths['/gauges'].post.requestBody.content['application/json'].schema.properties.thresholds.items;
    expect(Object.keys(threshold.properties)).toEqual(['label', 'value', 'level']);
  });
});
