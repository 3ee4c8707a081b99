import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { formatDurationSeconds } from '../../src/core/iso-duration.ts';
import { csvCell } from '../../src/api/csv.ts';
import { isoUtc } from '../../src/services/series-input.ts';
import { archivePaging, forcingUnits, readForcings, readObservations, readReforecasts, readSimulations, type Window } from '../../src/store/archive-repo.ts';
import { dailyTimes, makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

// Archive reads are streamed in pages and chunks; the bytes must be exactly those of the whole-body
// responses they replaced. The reference functions below are those responses' code as it was
// (read everything, build the object or the lines, serialise once).

let t: TestApp;
const id = riverGauge.id;
const times = dailyTimes('2020-01-01T00:00:00Z', 40);

const old = {
  async observations(w: Window, csv: boolean) {
    const rows = await readObservations(t.db, id, w);
    if (csv) return ['time,flow (m3/s),quality', ...rows.map((r) => `${isoUtc(r.t)},${r.value ?? ''},${csvCell(r.quality)}`)].join('\n') + '\n';
    return JSON.stringify({ gaugeId: id, unit: 'm3/s', times: rows.map((r) => isoUtc(r.t)), values: rows.map((r) => r.value), quality: rows.map((r) => r.quality) });
  },
  async forcings(w: Window, variables: string | undefined, csv: boolean) {
    const units = await forcingUnits(t.db, id);
    const names = variables ? variables.split(',').map((s) => s.trim()) : [...units.keys()].sort();
    const rows = await readForcings(t.db, id, w, names);
    const timeSet = [...new Set(rows.map((r) => r.t))].sort((a, b) => a - b);
    const index = new Map(timeSet.map((x, i) => [x, i]));
    const columns = names.filter((n) => units.has(n)).map((name) => ({ name, unit: units.get(name)!, values: new Array<number | null>(timeSet.length).fill(null) }));
    const byName = new Map(columns.map((c) => [c.name, c]));
    for (const r of rows) byName.get(r.variable)!.values[index.get(r.t)!] = r.value;
    if (csv) return [['time', ...columns.map((c) => `${c.name} (${c.unit})`)].join(','), ...timeSet.map((x, i) => [isoUtc(x), ...columns.map((c) => c.values[i] ?? '')].join(','))].join('\n') + '\n';
    return JSON.stringify({ gaugeId: id, times: timeSet.map(isoUtc), variables: columns });
  },
  async simulations(w: Window, members: string | undefined, csv: boolean) {
    const rows = await readSimulations(t.db, id, w, members?.split(',').map((s) => s.trim()));
    const timeSet = [...new Set(rows.map((r) => r.t))].sort((a, b) => a - b);
    const index = new Map(timeSet.map((x, i) => [x, i]));
    const byMember = new Map<string, (number | null)[]>();
    for (const r of rows) {
      let values = byMember.get(r.member_id);
      if (!values) byMember.set(r.member_id, (values = new Array(timeSet.length).fill(null)));
      values[index.get(r.t)!] = r.value;
    }
    const list = [...byMember].map(([mid, values]) => ({ id: mid, values }));
    if (csv) return [['time', ...list.map((m) => `${m.id} (m3/s)`)].join(','), ...timeSet.map((x, i) => [isoUtc(x), ...list.map((m) => m.values[i] ?? '')].join(','))].join('\n') + '\n';
    return JSON.stringify({ gaugeId: id, unit: 'm3/s', times: timeSet.map(isoUtc), members: list });
  },
  async reforecasts(w: Window, csv: boolean) {
    const rows = await readReforecasts(t.db, id, w);
    if (csv) return ['issue_time,member,lead_time,flow (m3/s)', ...rows.map((r) => `${isoUtc(r.t)},${r.member_id},${formatDurationSeconds(r.lead * 86400)},${r.value ?? ''}`)].join('\n') + '\n';
    const runs: { issueTime: string; members: { id: string; values: (number | null)[] }[] }[] = [];
    let lastT = NaN;
    let lastMember = '';
    for (const r of rows) {
      if (r.t !== lastT) {
        runs.push({ issueTime: isoUtc(r.t), members: [] });
        lastT = r.t;
        lastMember = '';
      }
      const run = runs[runs.length - 1];
      if (r.member_id !== lastMember) {
        run.members.push({ id: r.member_id, values: [] });
        lastMember = r.member_id;
      }
      const values = run.members[run.members.length - 1].values;
      while (values.length < r.lead - 1) values.push(null);
      values.push(r.value);
    }
    return JSON.stringify({ gaugeId: id, unit: 'm3/s', timeStep: 'P1D', runs });
  },
};

async function post(resource: string, payload: unknown) {
  const res = await t.as('ingest', { method: 'POST', url: `/gauges/${id}/${resource}`, payload: payload as object });
  expect(res.statusCode, res.body).toBe(200);
}

// Awkward but valid values: nulls, tiny and large magnitudes, many digits.
const value = (i: number, k: number) => (i % 11 === 3 ? null : [0, 1e-7, 123456.789, 0.1 + 0.2, 42][(i + k) % 5] + k);

beforeAll(async () => {
  t = await makeTestApp();
  // The values test number round-trips (123456.789 among them), so the gauge's flow and precipitation caps are set above them.
  expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, maxFlow: 1e6, maxPrecipitation: 1e6 } })).statusCode).toBe(201);
  await post('observations', { unit: 'm3/s', times, values: times.map((_, i) => value(i, 0)), quality: times.map((_, i) => [null, 'good', 'estimated, "by eye"', ''][i % 4]) });
  await post('forcings', { times: times.slice(0, 30), variables: [{ name: 'precipitation', unit: 'mm', values: times.slice(0, 30).map((_, i) => value(i, 1)) }] });
  await post('forcings', { times: times.slice(10), variables: [{ name: 'air_temperature', unit: 'degC', values: times.slice(10).map((_, i) => value(i, -50)) }, { name: 'snow_depth', unit: 'cm', values: times.slice(10).map((_, i) => value(i, 2)) }] });
  await post('simulations', { unit: 'm3/s', times, members: [{ id: 'p01', values: times.map((_, i) => value(i, 3)) }, { id: 'p03', values: times.map((_, i) => value(i, 4)) }] });
  await post('simulations', { unit: 'm3/s', times: times.filter((_, i) => i % 3 === 0), members: [{ id: 'p02', values: times.filter((_, i) => i % 3 === 0).map((_, i) => value(i, 5)) }] });
  const runs = times.slice(0, 12).map((issueTime, r) => ({ issueTime, members: ['p01', 'p02', 'p03'].map((m, k) => ({ id: m, values: Array.from({ length: 6 }, (_, l) => value(l + r, k)) })) }));
  await post('reforecasts', { unit: 'm3/s', runs });
  // Missing leads (rows absent, not null): the reads pad them with null.
  await t.db.query(`delete from reforecasts where gauge_id = $1 and member_id = 'p02' and lead in (2, 3)`, [id]);
  await t.db.query(`delete from reforecasts where gauge_id = $1 and member_id = 'p01' and lead = 1 and issue_time = $2`, [id, times[4]]);
});
afterAll(async () => {
  archivePaging.rows = 1_000;
  await t?.close();
});

const windows: [string, Window][] = [
  ['', {}],
  [`from=${times[5]}&to=${times[33]}`, { fromMs: Date.parse(times[5]), toMs: Date.parse(times[33]) }],
  [`from=${times[39]}`, { fromMs: Date.parse(times[39]) }],
  [`to=${times[0]}`, { toMs: Date.parse(times[0]) }],
];

async function same(url: string, expected: string, csv: boolean) {
  const res = await t.as('read', { method: 'GET', url: `/gauges/${id}/${url}` });
  expect(res.statusCode).toBe(200);
  expect(res.headers['content-type']).toBe(csv ? 'text/csv; charset=utf-8' : 'application/json; charset=utf-8');
  expect(res.body).toBe(expected);
}

describe.each([3, 7, 5_000])('streamed archive reads equal the whole-body responses byte for byte (pages of %i rows)', (pageRows) => {
  beforeAll(() => {
    archivePaging.rows = pageRows;
  });

  it('observations', async () => {
    for (const [query, w] of windows) {
      for (const csv of [false, true]) await same(`observations?${query}${csv ? '&format=csv' : ''}`, await old.observations(w, csv), csv);
    }
  });

  it('forcings, all, chosen, repeated and unknown variables', async () => {
    for (const [query, w] of windows) {
      for (const variables of [undefined, 'snow_depth,precipitation', 'precipitation,air_temperature,precipitation', 'nothing,air_temperature']) {
        for (const csv of [false, true]) {
          await same(`forcings?${query}${variables ? `&variables=${variables}` : ''}${csv ? '&format=csv' : ''}`, await old.forcings(w, variables, csv), csv);
        }
      }
    }
  });

  it('simulations, all and chosen members, on a union of their times', async () => {
    for (const [query, w] of windows) {
      for (const members of [undefined, 'p02', 'p03,p01', 'none']) {
        for (const csv of [false, true]) {
          await same(`simulations?${query}${members ? `&members=${members}` : ''}${csv ? '&format=csv' : ''}`, await old.simulations(w, members, csv), csv);
        }
      }
    }
  });

  it('reforecasts, missing leads padded with null', async () => {
    for (const [query, w] of windows) {
      for (const csv of [false, true]) await same(`reforecasts?${query}${csv ? '&format=csv' : ''}`, await old.reforecasts(w, csv), csv);
    }
  });
});
