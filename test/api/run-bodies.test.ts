// A forecast system posts only the lead times (JSON, CSV or NetCDF); the warm-up comes from the
// archive, and the answer says what it took and what it converted. Every problem of one body is
// answered at once.
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody, smallFit } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 5, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const lastIndex = scenario.times.length - 1;
const fixtures = new URL('../fixtures/netcdf-run/', import.meta.url);

const post = (payload: unknown, headers: Record<string, string> = {}, query = '') =>
  t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs${query}`, payload: payload as string, headers });
const runCount = async () => Number((await t.db.query<{ n: number }>('select count(*)::int as n from forecast_runs')).rows[0].n);

/** The scenario's run with its lead times only: what a forecast system would send. */
function leadsOnly(index: number, extra: Record<string, unknown> = {}) {
  const run = scenario.forecastRun(index);
  const w = run.warmupSteps;
  return {
    issueTime: run.issueTime,
    unit: 'm3/s',
    members: run.members.map((m) => ({ id: m.id, values: m.values.slice(w) })),
    forcings: { precipitation: run.forcings.precipitation.slice(w), air_temperature: run.forcings.air_temperature.slice(w) },
    ...extra,
  };
}

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario);
  await fitThroughApi(t, runner, gaugeId, smallFit);
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

describe('runs without warm-up', () => {
  it('takes the warm-up from the archive and answers as if the run had carried it', async () => {
    const index = lastIndex - 25;
    const withWarmup = await post(scenarioRunBody(scenario.forecastRun(index), { source: 'full', seed: 11, trajectories: 300 }));
    expect(withWarmup.statusCode, withWarmup.body).toBe(201);
    const bare = await post(leadsOnly(index, { source: 'bare', seed: 11, trajectories: 300 }));
    expect(bare.statusCode, bare.body).toBe(201);
    const a = withWarmup.json();
    const b = bare.json();
    // The scenario's warm-up is the archived simulation and forcings: the same inputs, the same answer.
    expect(b.ensemble.corrected).toEqual(a.ensemble.corrected);
    expect(b.quantiles).toEqual(a.quantiles);
    expect(b.updating).toEqual(a.updating);
    expect(a.input.warmup.fromArchive).toEqual([]);
    expect(a.input.warmup.stepsInRun).toBe(scenario.forecastRun(index).warmupSteps);
    expect(b.input.warmup.stepsInRun).toBe(0);
    expect(b.input.warmup.stepsNeeded).toBe(smallFit.simLags);
    const sims = b.input.warmup.fromArchive.find((x: { series: string }) => x.series === 'simulated flow of each member');
    expect(sims.to).toBe(scenario.times[index]);
    expect(sims.steps).toBeGreaterThanOrEqual(smallFit.simLags);
    expect(b.input.warmup.fromArchive.map((x: { series: string }) => x.series)).toEqual(expect.arrayContaining(['precipitation']));
    expect(b.input).toMatchObject({ form: 'json', unit: 'm3/s', conversion: null });
  });

  it('answers 422 naming every time the archive lacks, and writes nothing', async () => {
    const before = await runCount();
    // Two days into the archive: the model's 5 lags reach three days before its first value.
    const res = await post({ ...leadsOnly(lastIndex - 30), issueTime: scenario.times[1], source: 'early' });
    expect(res.statusCode, res.body).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    const errors = res.json().errors as { path: string; message: string }[];
    expect(errors.filter((e) => e.path.startsWith('body.members['))).toHaveLength(6);
    const missing = ['2004-12-29T00:00:00Z', '2004-12-30T00:00:00Z', '2004-12-31T00:00:00Z'];
    for (const time of missing) expect(errors[0].message).toContain(time);
    expect(errors[0].message).not.toContain('2005-01-01T00:00:00Z');
    expect(await runCount()).toBe(before);
  });

  it('lists the schema problems and the value problems of one body together', async () => {
    const body = leadsOnly(lastIndex - 26, { source: 'many problems', trajectories: 3, extra: true }) as Record<string, any>;
    body.members[0].values[2] = -1;
    body.members[1].id = 'not a member!';
    body.members[2].values[0] = 'x';
    body.unit = 'furlongs';
    const res = await post(body);
    expect(res.statusCode).toBe(422);
    const paths = (res.json().errors as { path: string }[]).map((e) => e.path);
    expect(paths).toEqual(expect.arrayContaining(['body.trajectories', 'body', 'body.members[1].id', 'body.unit', 'body.members[0].values[2]', 'body.members[2].values[0]']));
  });
});

describe('CSV and NetCDF run bodies', () => {
  it('takes the long CSV form with forcing columns, converting l/s, and names CSV lines in problems', async () => {
    const run = leadsOnly(lastIndex - 27);
    const lines = ['issue_time,member,lead_time,flow (L s-1),precipitation (mm),air_temperature (degC)'];
    for (const m of run.members) m.values.forEach((v, k) => lines.push(`${run.issueTime},${m.id},P${k + 1}D,${Math.round(v * 1000 * 1e4) / 1e4},${run.forcings.precipitation[k]},${run.forcings.air_temperature[k]}`));
    const res = await post(lines.join('\n'), { 'content-type': 'text/csv' }, '?source=csv&seed=11&trajectories=300');
    expect(res.statusCode, res.body).toBe(201);
    const csvAnswer = res.json();
    expect(csvAnswer.source).toBe('csv');
    expect(csvAnswer.input).toMatchObject({ form: 'csv', unit: 'l/s', conversion: { from: 'l/s', to: 'm3/s', factor: 0.001 } });
    const json = (await post(leadsOnly(lastIndex - 27, { source: 'json', seed: 11, trajectories: 300 }))).json();
    csvAnswer.ensemble.raw.forEach((m: { values: number[] }, i: number) => m.values.forEach((v, k) => expect(v).toBeCloseTo(json.ensemble.raw[i].values[k], 4)));

    const bad = [...lines];
    bad[3] = bad[3].replace(/,P3D,[^,]+,/, ',P3D,-5,');
    const refused = await post(bad.join('\n'), { 'content-type': 'text/csv' }, '?source=csv-bad&trajectories=2');
    expect(refused.statusCode).toBe(422);
    expect(refused.json().errors).toEqual(expect.arrayContaining([
      { path: 'line 4, column flow (L s-1)', message: expect.stringMatching(/cannot be negative/) },
      { path: 'query.trajectories', message: expect.any(String) },
    ]));
  });

  it('takes a classic NetCDF run written by scipy, converting ft3 s-1 by the exact foot', async () => {
    const expected = JSON.parse(readFileSync(new URL('expected.json', fixtures), 'utf8')).classic;
    const res = await post(readFileSync(new URL('run-classic.nc', fixtures)), { 'content-type': 'application/x-netcdf' }, '?source=netcdf-classic');
    expect(res.statusCode, res.body).toBe(201);
    const f = res.json();
    expect(f.issueTime).toBe(expected.issueTime);
    expect(f.input.form).toBe('netcdf');
    expect(f.input.conversion).toMatchObject({ from: 'ft3/s', to: 'm3/s', factor: 0.028316846592 });
    expect(f.input.conversion.source).toMatch(/0\.3048 m/);
    // The raw members as served (rounded to 1e-4) against numpy's conversion (make.py).
    f.ensemble.raw.forEach((m: { id: string; values: number[] }, i: number) => {
      expect(m.id).toBe(expected.members[i]);
      m.values.forEach((v, k) => expect(v).toBeCloseTo(expected.values_m3s[i][k], 4));
    });
  });

  it('takes a NetCDF-4 run written by netCDF4-python, its own warm-up first and the archive for the rest', async () => {
    const res = await post(readFileSync(new URL('run-netcdf4.nc', fixtures)), { 'content-type': 'application/x-netcdf' }, '?source=netcdf4');
    expect(res.statusCode, res.body).toBe(201);
    const f = res.json();
    expect(f.input.warmup.stepsInRun).toBe(2);
    // p02's value at 2008-10-31 is the file's _FillValue: the archive fills it, and the steps before.
    const taken = Object.fromEntries(f.input.warmup.fromArchive.map((x: { series: string; to: string }) => [x.series, x.to]));
    expect(taken['simulated flow of member p02']).toBe('2008-10-31T00:00:00Z');
    expect(taken['simulated flow of member p01']).toBe('2008-10-30T00:00:00Z');
    expect(f.input.unit).toBe('m3/s');
    expect(f.input.conversion).toBeNull();
  });
});

describe('reading back the stored quantile set', () => {
  it('gives every stored level (the 100 midpoint levels and the asked ones), or the levels named', async () => {
    const posted = await post(leadsOnly(lastIndex - 28, { source: 'levels', seed: 3, trajectories: 400 }));
    expect(posted.statusCode, posted.body).toBe(201);
    const run = posted.json();
    const url = `/forecasts/${run.id}/quantiles`;
    const all = await t.as('read', { method: 'GET', url });
    expect(all.statusCode, all.body).toBe(200);
    const set = all.json().quantiles;
    expect(set.probabilities).toHaveLength(100 + 7);
    expect(set.probabilities[0]).toBe(0.005);
    expect(set.probabilities.at(-1)).toBe(0.995);
    for (let k = 0; k < run.leadTimes.length; k++) {
      for (let q = 1; q < set.probabilities.length; q++) expect(set.values[q][k]).toBeGreaterThanOrEqual(set.values[q - 1][k] - 1e-4);
    }
    // The asked levels are the answer's own; the stored ones bracket them.
    const at = (p: number) => set.values[set.probabilities.indexOf(p)];
    expect(at(0.5)).toEqual(run.quantiles.values[3]);
    at(0.5).forEach((m: number, k: number) => {
      expect(at(0.495)[k]).toBeLessThanOrEqual(m + 1e-4);
      expect(at(0.505)[k]).toBeGreaterThanOrEqual(m - 1e-4);
    });
    const two = (await t.as('read', { method: 'GET', url: `${url}?levels=0.005,0.995` })).json().quantiles;
    expect(two.probabilities).toEqual([0.005, 0.995]);
    const refused = await t.as('read', { method: 'GET', url: `${url}?levels=0.3` });
    expect(refused.statusCode).toBe(422);
    expect(refused.json().errors[0].path).toBe('query.levels');
    const csv = await t.as('read', { method: 'GET', url: `${url}?format=csv` });
    const lines = csv.body.trim().split('\n');
    expect(lines).toHaveLength(1 + run.leadTimes.length);
    expect(lines[0].split(',')).toHaveLength(2 + 107 + 3);
  });
});
