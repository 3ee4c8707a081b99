import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { dailyTimes, makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
const id = riverGauge.id;
const times = dailyTimes('2021-03-01T00:00:00Z', 6);

beforeAll(async () => {
  t = await makeTestApp({ BODY_LIMIT_MB: '1' });
  expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(201);
});
afterAll(async () => t.close());

async function counts() {
  return (await t.as('read', { method: 'GET', url: `/gauges/${id}` })).json().archive as Record<string, number>;
}

function post(url: string, payload: unknown, type = 'application/json') {
  return t.as('ingest', { method: 'POST', url: `/gauges/${id}/${url}`, payload: payload as string, headers: { 'content-type': type } });
}

describe('archive ingest and read-back', () => {
  it('observations: JSON in, JSON and CSV out identically; re-sending changes nothing', async () => {
    const body = { unit: 'm3/s', times, values: [4.2, 5.1, null, 7.75, 6, 5.5], quality: ['good', 'good', null, 'estimated', 'good', 'good'] };
    const first = await post('observations', body);
    expect(first.statusCode).toBe(200);
    expect(first.json()).toEqual({ gaugeId: id, received: 6, written: 6 });
    const again = await post('observations', body);
    expect(again.json().written).toBe(0);
    const read = await t.as('read', { method: 'GET', url: `/gauges/${id}/observations` });
    expect(read.json()).toEqual({ gaugeId: id, ...body });
    const csv = await t.as('read', { method: 'GET', url: `/gauges/${id}/observations?format=csv` });
    expect(csv.headers['content-type']).toContain('text/csv');
    const replay = await post('observations', csv.body, 'text/csv');
    expect(replay.json()).toEqual({ gaugeId: id, received: 6, written: 0 });
    const window = await t.as('read', { method: 'GET', url: `/gauges/${id}/observations?from=${times[1]}&to=${times[3]}` });
    expect(window.json().times).toEqual([times[1], times[2]]);
  });

  it('observations: a CSV correction changes only the changed row', async () => {
    const res = await post('observations', `time,flow (m3/s),quality\n${times[2]},6.4,good\n`, 'text/csv');
    expect(res.json()).toEqual({ gaugeId: id, received: 1, written: 1 });
  });

  it('forcings: JSON and CSV, named variables with units', async () => {
    const body = {
      times,
      variables: [
        { name: 'air_temperature', unit: 'degC', values: [-2.5, -1, 0.5, 3, 1, -4] },
        { name: 'precipitation', unit: 'mm', values: [0, 12.5, 3, 0, null, 0.2] },
        { name: 'snow_depth', unit: 'cm', values: [30, 31, 29, 25, 24, 24] },
      ],
    };
    expect((await post('forcings', body)).json()).toEqual({ gaugeId: id, received: 18, written: 18 });
    const read = (await t.as('read', { method: 'GET', url: `/gauges/${id}/forcings` })).json();
    expect(read).toEqual({ gaugeId: id, ...body });
    const csv = await t.as('read', { method: 'GET', url: `/gauges/${id}/forcings`, headers: { accept: 'text/csv' } });
    expect(csv.body.split('\n')[0]).toBe('time,air_temperature (degC),precipitation (mm),snow_depth (cm)');
    expect((await post('forcings', csv.body, 'text/csv')).json().written).toBe(0);
  });

  it('member simulations: JSON and CSV round trip', async () => {
    const body = {
      unit: 'm3/s',
      times,
      members: [
        { id: 'p01', values: [3.9, 4.8, 6.1, 7.0, 5.5, 5.0] },
        { id: 'p02', values: [4.1, 5.0, 6.4, 7.3, 5.9, null] },
      ],
    };
    expect((await post('simulations', body)).json()).toEqual({ gaugeId: id, received: 12, written: 12 });
    expect((await t.as('read', { method: 'GET', url: `/gauges/${id}/simulations` })).json()).toEqual({ gaugeId: id, ...body });
    const csv = await t.as('read', { method: 'GET', url: `/gauges/${id}/simulations?format=csv` });
    expect(csv.body.split('\n')[0]).toBe('time,p01 (m3/s),p02 (m3/s)');
    expect((await post('simulations', csv.body, 'text/csv')).json().written).toBe(0);
  });

  it('reforecasts: JSON and CSV round trip with ISO 8601 lead times', async () => {
    const body = {
      unit: 'm3/s',
      runs: [
        { issueTime: times[0], members: [{ id: 'p01', values: [5, 6, 7] }, { id: 'p02', values: [5.5, 6.5, null] }] },
        { issueTime: times[1], members: [{ id: 'p01', values: [6, 7, 8] }, { id: 'p02', values: [6.5, 7.5, 8.5] }] },
      ],
    };
    expect((await post('reforecasts', body)).json()).toEqual({ gaugeId: id, received: 12, written: 12 });
    const read = (await t.as('read', { method: 'GET', url: `/gauges/${id}/reforecasts` })).json();
    expect(read).toEqual({ gaugeId: id, timeStep: 'P1D', ...body });
    const csv = await t.as('read', { method: 'GET', url: `/gauges/${id}/reforecasts?format=csv` });
    expect(csv.body.split('\n').slice(0, 3)).toEqual([
      'issue_time,member,lead_time,flow (m3/s)',
      `${times[0]},p01,P1D,5`,
      `${times[0]},p01,P2D,6`,
    ]);
    expect((await post('reforecasts', csv.body, 'text/csv')).json()).toEqual({ gaugeId: id, received: 12, written: 0 });
  });
});

describe('bad input is refused with the field named, and nothing is written', () => {
  const obs = (values: unknown[], ts: string[] = times.slice(0, values.length)) => ({ unit: 'm3/s', times: ts, values });
  const cases: [string, string, unknown, string, string, RegExp][] = [
    ['non-finite number (JSON overflow)', 'observations', '{"unit":"m3/s","times":["2022-01-01T00:00:00Z"],"values":[1e999]}', 'application/json', 'body.values[0]', /finite/],
    ['non-finite number (string)', 'observations', obs([1, 'NaN']), 'application/json', 'body.values[1]', /finite/],
    ['negative flow', 'observations', obs([1, -0.5]), 'application/json', 'body.values[1]', /negative/],
    ['negative precipitation', 'forcings', { times: times.slice(0, 1), variables: [{ name: 'precipitation', unit: 'mm', values: [-1] }] }, 'application/json', 'body.variables[0].values[0]', /negative/],
    ['time off the step', 'observations', obs([1], ['2022-01-01T06:00:00Z']), 'application/json', 'body.times[0]', /time step/],
    ['time without offset', 'observations', obs([1], ['2022-01-01T00:00:00']), 'application/json', 'body.times[0]', /RFC 3339/],
    ['unsorted times', 'observations', obs([1, 2], [times[1], times[0]]), 'application/json', 'body.times[1]', /increasing/],
    ['duplicate times', 'observations', obs([1, 2], [times[0], times[0]]), 'application/json', 'body.times[1]', /duplicate/],
    ['mismatched lengths', 'observations', obs([1, 2, 3], times.slice(0, 2)), 'application/json', 'body.values', /has 3 entries/],
    ['mismatched member lengths', 'simulations', { unit: 'm3/s', times: times.slice(0, 2), members: [{ id: 'p01', values: [1] }] }, 'application/json', 'body.members[0].values', /has 1 entries/],
    ['wrong flow unit', 'observations', { ...obs([1]), unit: 'ft3/s' }, 'application/json', 'body.unit', /m3\/s/],
    ['wrong precipitation unit', 'forcings', { times: times.slice(0, 1), variables: [{ name: 'precipitation', unit: 'in', values: [1] }] }, 'application/json', 'body.variables[0].unit', /mm/],
    ['wrong unit for a stored variable', 'forcings', { times: times.slice(0, 1), variables: [{ name: 'snow_depth', unit: 'm', values: [1] }] }, 'application/json', 'body.variables[0].unit', /stored in cm/],
    ['unknown member', 'reforecasts', { unit: 'm3/s', runs: [{ issueTime: times[2], members: [{ id: 'p99', values: [1] }] }] }, 'application/json', 'body.runs[0].members[0].id', /unknown member/],
    ['malformed CSV: cell count', 'observations', `time,flow (m3/s)\n${times[0]},1\n${times[1]},2,extra\n`, 'text/csv', 'line 3', /expected 2 cells/],
    ['malformed CSV: open quote', 'observations', `time,flow (m3/s)\n"${times[0]},1\n`, 'text/csv', 'line 2', /quote/],
    ['malformed CSV: not a number', 'observations', `time,flow (m3/s)\n${times[0]},1\n${times[1]},lots\n`, 'text/csv', 'line 3, column flow', /finite/],
    ['malformed CSV: header', 'observations', `when,flow (m3/s)\n${times[0]},1\n`, 'text/csv', 'line 1', /time/],
    ['CSV unit missing', 'forcings', `time,precipitation\n${times[0]},1\n`, 'text/csv', 'line 1, column precipitation', /unit/],
    ['CSV reforecast lead gap', 'reforecasts', `issue_time,member,lead_time,flow (m3/s)\n${times[3]},p01,P1D,1\n${times[3]},p01,P3D,1\n`, 'text/csv', 'line 3, column lead_time', /without gaps/],
    ['malformed JSON', 'observations', '{"unit": "m3/s", "times": [', 'application/json', 'body', /JSON/i],
  ];

  it.each(cases)('%s', async (_name, url, payload, type, path, message) => {
    const before = await counts();
    const res = await post(url, typeof payload === 'string' ? payload : JSON.stringify(payload), type);
    expect([400, 422]).toContain(res.statusCode);
    expect(res.headers['content-type']).toContain('application/problem+json');
    const problem = res.json();
    const hit = problem.errors.find((e: { path: string }) => e.path === path);
    expect(hit, JSON.stringify(problem.errors)).toBeDefined();
    expect(hit.message).toMatch(message);
    expect(await counts()).toEqual(before);
  });

  it('a batch with one bad value among good ones writes none of them', async () => {
    const before = await counts();
    const res = await post('simulations', {
      unit: 'm3/s',
      times: dailyTimes('2023-01-01T00:00:00Z', 3),
      members: [{ id: 'p01', values: [1, 2, 3] }, { id: 'p02', values: [1, 2, -3] }],
    });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors).toEqual([{ path: 'body.members[1].values[2]', message: 'flow cannot be negative (-3)' }]);
    expect(await counts()).toEqual(before);
  });

  it('unknown gauge', async () => {
    const res = await t.as('ingest', { method: 'POST', url: '/gauges/no-such-gauge/observations', payload: obs([1]) });
    expect(res.statusCode).toBe(404);
    expect(res.json().detail).toContain('no-such-gauge');
  });

  it('payload over the size limit', async () => {
    const n = 60_000;
    const big = { unit: 'm3/s', times: dailyTimes('1900-01-01T00:00:00Z', n), values: new Array(n).fill(1.25) };
    const before = await counts();
    const res = await post('observations', JSON.stringify(big));
    expect(res.statusCode).toBe(413);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(await counts()).toEqual(before);
  });

  it('unsupported content type', async () => {
    const res = await post('observations', '<xml/>', 'application/xml');
    expect(res.statusCode).toBe(415);
    expect(res.headers['content-type']).toContain('application/problem+json');
  });
});
