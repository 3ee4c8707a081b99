import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { dailyTimes, makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

// Findings of an outside probe: impossible times were rolled to real ones and written, CSV read
// 0x10 as 16, and absurd values (1e300) were stored. Every refusal names the field or CSV line
// and writes nothing.
let t: TestApp;
const id = riverGauge.id;
const bare = 'bare-creek-at-nowhere';

beforeAll(async () => {
  t = await makeTestApp();
  expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(201);
  expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: bare, thresholds: [] } })).statusCode).toBe(201);
  // 2023-03-01 holds a real value that an impossible 2023-02-29 must not overwrite.
  const times = dailyTimes('2023-02-25T00:00:00Z', 6);
  const seed = await post(id, 'observations', { unit: 'm3/s', times, values: [4, 5, 6, 7, 8, 9] });
  expect(seed.statusCode, seed.body).toBe(200);
  const simulations = await post(id, 'simulations', { unit: 'm3/s', times, members: [{ id: 'p01', values: [4, 5, 6, 7, 8, 9] }] });
  expect(simulations.statusCode, simulations.body).toBe(200);
  const forcings = await post(id, 'forcings', { times, variables: [{ name: 'precipitation', unit: 'mm', values: [0, 1, 2, 3, 4, 5] }, { name: 'air_temperature', unit: 'degC', values: [1, 2, 3, 4, 5, 6] }] });
  expect(forcings.statusCode, forcings.body).toBe(200);
});
afterAll(async () => t.close());

function post(gauge: string, resource: string, payload: unknown, type = 'application/json') {
  return t.as('ingest', { method: 'POST', url: `/gauges/${gauge}/${resource}`, payload: payload as string, headers: { 'content-type': type } });
}

async function observationAt(time: string): Promise<number | null> {
  const res = await t.as('read', { method: 'GET', url: `/gauges/${id}/observations?from=${time}` });
  const body = res.json();
  return body.times[0] === time ? body.values[0] : null;
}

async function archiveCounts(gauge = id): Promise<Record<string, number>> {
  return (await t.as('read', { method: 'GET', url: `/gauges/${gauge}` })).json().archive;
}

function expectProblem(res: { statusCode: number; headers: Record<string, unknown>; json(): any; body: string }, path: string, message?: RegExp) {
  expect(res.statusCode, res.body).toBe(422);
  expect(res.headers['content-type']).toContain('application/problem+json');
  const errors = res.json().errors as { path: string; message: string }[];
  const hit = errors.find((e) => e.path === path);
  expect(hit, `${path} in ${res.body}`).toBeDefined();
  if (message) expect(hit!.message).toMatch(message);
}

const impossible = ['2023-02-29T00:00:00Z', '2023-02-30T00:00:00Z', '2023-04-31T00:00:00Z', '2023-02-28T24:00:00Z'];

describe('impossible times are refused, never rolled over', () => {
  it.each(impossible)('observations JSON and CSV: %s', async (time) => {
    const before = await archiveCounts();
    expectProblem(await post(id, 'observations', { unit: 'm3/s', times: [time], values: [123] }), 'body.times[0]', /RFC 3339/);
    expectProblem(await post(id, 'observations', `time,flow (m3/s)\n${time},123\n`, 'text/csv'), 'line 2, column time');
    expect(await observationAt('2023-03-01T00:00:00Z')).toBe(8);
    expect(await archiveCounts()).toEqual(before);
  });

  it.each(impossible)('forcings, simulations and reforecasts: %s', async (time) => {
    const before = await archiveCounts();
    expectProblem(await post(id, 'forcings', { times: [time], variables: [{ name: 'precipitation', unit: 'mm', values: [1] }] }), 'body.times[0]');
    expectProblem(await post(id, 'forcings', `time,precipitation (mm)\n${time},1\n`, 'text/csv'), 'line 2, column time');
    expectProblem(await post(id, 'simulations', { unit: 'm3/s', times: [time], members: [{ id: 'p01', values: [1] }] }), 'body.times[0]');
    expectProblem(await post(id, 'simulations', `time,p01 (m3/s)\n${time},1\n`, 'text/csv'), 'line 2, column time');
    expectProblem(await post(id, 'reforecasts', { unit: 'm3/s', runs: [{ issueTime: time, members: [{ id: 'p01', values: [1, 2] }] }] }), 'body.runs[0].issueTime');
    expectProblem(await post(id, 'reforecasts', `issue_time,member,lead_time,flow (m3/s)\n${time},p01,P1D,1\n`, 'text/csv'), 'line 2, column issue_time');
    expect(await archiveCounts()).toEqual(before);
  });

  it.each(impossible)('runs and query parameters: %s', async (time) => {
    const run = await post(id, 'runs', { issueTime: time, unit: 'm3/s', members: [{ id: 'p01', values: [1, 2] }] });
    expectProblem(run, 'body.issueTime');
    const read = await t.as('read', { method: 'GET', url: `/gauges/${id}/observations?from=${time}` });
    expectProblem(read, 'query.from');
    const runs = await t.as('read', { method: 'GET', url: `/gauges/${id}/forecasts?to=${time}` });
    expectProblem(runs, 'query.to');
  });
});

describe('CSV numbers are plain decimals', () => {
  it.each(['0x10', '1e', 'Infinity', '-Infinity', 'NaN', '12abc', '12 x', '1,5', '0b11', '1_000', '--1', '.'])('refuses %j', async (cell) => {
    const text = `time,flow (m3/s)\n2023-03-10T00:00:00Z,"${cell}"\n`;
    expectProblem(await post(id, 'observations', text, 'text/csv'), 'line 2, column flow');
    expect(await observationAt('2023-03-10T00:00:00Z')).toBe(null);
  });

  it.each([
    ['12', 12],
    [' 12 ', 12],
    ['1.5e1', 15],
    ['1.5E+1', 15],
    ['+7', 7],
    ['.5', 0.5],
    ['3.', 3],
  ])('accepts %j as %d', async (cell, value) => {
    const res = await post(id, 'observations', `time,flow (m3/s)\n2023-03-03T00:00:00Z,${cell}\n`, 'text/csv');
    expect(res.statusCode, res.body).toBe(200);
    expect(await observationAt('2023-03-03T00:00:00Z')).toBe(value);
  });
});

describe('plausible values', () => {
  it('never stores a value that a float32 cannot hold, even on a gauge with no archive', async () => {
    for (const v of [1e300, 3.5e38]) {
      expectProblem(await post(bare, 'observations', { unit: 'm3/s', times: ['2023-03-01T00:00:00Z'], values: [v] }), 'body.values[0]');
      expectProblem(await post(bare, 'observations', `time,flow (m3/s)\n2023-03-01T00:00:00Z,${v}\n`, 'text/csv'), 'line 2, column flow');
    }
    expect((await archiveCounts(bare)).observations).toBe(0);
  });

  it('refuses flow beyond the cap derived from the archive, naming the value and the cap', async () => {
    // Largest archived flow 9 m3/s (2023-03-02), highest threshold 90: the cap is 10 × 90 = 900 (our own rule).
    const limits = (await t.as('read', { method: 'GET', url: `/gauges/${id}` })).json().limitsInForce;
    expect(limits.maxFlow).toEqual({ value: 900, source: 'archive' });
    expectProblem(await post(id, 'observations', { unit: 'm3/s', times: ['2023-03-04T00:00:00Z'], values: [901] }), 'body.values[0]', /901.*900/);
    expectProblem(await post(id, 'simulations', `time,p01 (m3/s)\n2023-03-04T00:00:00Z,1e300\n`, 'text/csv'), 'line 2, column p01', /1e\+300/);
    expectProblem(await post(id, 'reforecasts', { unit: 'm3/s', runs: [{ issueTime: '2023-03-01T00:00:00Z', members: [{ id: 'p01', values: [1, 5000] }] }] }), 'body.runs[0].members[0].values[1]');
    expect((await post(id, 'observations', { unit: 'm3/s', times: ['2023-03-04T00:00:00Z'], values: [899] })).statusCode).toBe(200);
  });

  it('uses the cap set on the gauge, and refuses precipitation and temperature outside their ranges', async () => {
    const patch = await t.as('admin', { method: 'PATCH', url: `/gauges/${id}`, payload: { maxFlow: 50, maxPrecipitation: 80, airTemperatureRange: { min: -40, max: 45 } } });
    expect(patch.statusCode, patch.body).toBe(200);
    expect(patch.json()).toMatchObject({ maxFlow: 50, maxPrecipitation: 80, airTemperatureRange: { min: -40, max: 45 } });
    expectProblem(await post(id, 'observations', `time,flow (m3/s)\n2023-03-05T00:00:00Z,51\n`, 'text/csv'), 'line 2, column flow', /51.*50/);
    const forcings = await post(id, 'forcings', { times: ['2023-03-05T00:00:00Z', '2023-03-06T00:00:00Z'], variables: [{ name: 'precipitation', unit: 'mm', values: [81, -1] }, { name: 'air_temperature', unit: 'degC', values: [46, -41] }] });
    expectProblem(forcings, 'body.variables[0].values[0]', /81/);
    expectProblem(forcings, 'body.variables[0].values[1]', /negative/);
    expectProblem(forcings, 'body.variables[1].values[0]', /46/);
    expectProblem(forcings, 'body.variables[1].values[1]', /-41/);
    const run = await post(id, 'runs', { issueTime: '2023-03-02T00:00:00Z', unit: 'm3/s', members: [{ id: 'p01', values: [1, 1e300] }], forcings: { precipitation: [0, 1e6] } });
    // No correction is possible on this gauge (no model, no raw archive), but the values are checked first.
    expectProblem(run, 'body.members[0].values[1]', /50/);
    expectProblem(run, 'body.forcings.precipitation[1]');
    const unset = await t.as('admin', { method: 'PATCH', url: `/gauges/${id}`, payload: { maxFlow: null, maxPrecipitation: null, airTemperatureRange: null } });
    expect(unset.json().limitsInForce.maxFlow.source).toBe('archive');
  });

  it('refuses impossible limits on the gauge and documents the fields', async () => {
    const bad = await t.as('admin', { method: 'PATCH', url: `/gauges/${id}`, payload: { maxFlow: -1, airTemperatureRange: { min: 10, max: 5 } } });
    expect(bad.statusCode).toBe(422);
    const paths = bad.json().errors.map((e: { path: string }) => e.path);
    expect(paths).toEqual(expect.arrayContaining(['body.maxFlow', 'body.airTemperatureRange.max']));
    const huge = await t.as('admin', { method: 'PATCH', url: `/gauges/${id}`, payload: { thresholds: [{ label: 'beyond float32', value: 1e39 }] } });
    expect(huge.statusCode).toBe(422);
    expect(huge.json().errors[0].path).toBe('body.thresholds[0].value');
    const doc = (await t.as(null, { method: 'GET', url: '/openapi.json' })).json();
    const props = doc.paths['/gauges'].post.requestBody.content['application/json'].schema.properties;
    expect(Object.keys(props)).toEqual(expect.arrayContaining(['maxFlow', 'maxPrecipitation', 'airTemperatureRange']));
  });
});
