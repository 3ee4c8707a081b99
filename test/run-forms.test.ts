// Reading a run's CSV and NetCDF forms into the JSON body they stand for. The NetCDF files and the
// values they hold come from test/fixtures/netcdf-run/make.py (classic NetCDF by scipy.io.netcdf_file,
// python3-scipy 1.10.1; NetCDF-4 by netCDF4-python, python3-netcdf4 1.6.2 with netCDF-C 4.9.0 and
// HDF5 1.10.8), so the readers are checked against files the reference libraries wrote.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { cfTimeUnits, runFromCsv, runFromNetcdf } from '../src/api/run-forms.ts';
import { flowUnit, FOOT_M } from '../src/core/flow-units.ts';
import { Problem } from '../src/services/problem.ts';

const dir = new URL('./fixtures/netcdf-run/', import.meta.url);
const expected = JSON.parse(readFileSync(new URL('expected.json', dir), 'utf8'));
const DAY = 86_400;

describe('flow units', () => {
  it('takes the CF spelling and converts l/s and ft3/s by their exact definitions', () => {
    expect(flowUnit('m3 s-1')).toMatchObject({ name: 'm3/s', factor: 1 });
    expect(flowUnit(' m3/s ')).toMatchObject({ factor: 1 });
    expect(flowUnit('L s-1')!.factor).toBe(0.001);
    // 1 ft = 0.3048 m exactly (international yard and pound agreement, 1959); worked by hand: 0.3048³ = 0.028316846592.
    expect(flowUnit('cfs')!.factor).toBe(0.028316846592);
    expect(flowUnit('ft3 s-1')!.factor).toBeCloseTo(FOOT_M ** 3, 15);
    expect(flowUnit('ft3/s')!.source).toMatch(/0\.3048 m exactly/);
    expect(flowUnit('m3/h')).toBeNull();
  });
});

describe('CF time units', () => {
  it('reads "<unit> since <date>" with and without a zone', () => {
    expect(cfTimeUnits('days since 2008-11-01 00:00:00')).toEqual({ seconds: DAY, epochMs: Date.parse('2008-11-01T00:00:00Z') });
    expect(cfTimeUnits('hours since 2008-11-01T00:00:00Z')).toEqual({ seconds: 3600, epochMs: Date.parse('2008-11-01T00:00:00Z') });
    expect(cfTimeUnits('minutes since 2008-11-01 06:00 +02:00')!.epochMs).toBe(Date.parse('2008-11-01T04:00:00Z'));
    expect(cfTimeUnits('fortnights since 2008-11-01')).toBeNull();
  });
});

describe('NetCDF run bodies', () => {
  it('reads a classic NetCDF file written by scipy (char member names, flow in ft3 s-1, a forcing)', async () => {
    const run = await runFromNetcdf(readFileSync(new URL('run-classic.nc', dir)), DAY);
    const e = expected.classic;
    expect(run.json.issueTime).toBe(e.issueTime);
    expect(run.json.unit).toBe(e.unit);
    expect(run.json.warmupSteps).toBe(0);
    const members = run.json.members as { id: string; values: number[] }[];
    expect(members.map((m) => m.id)).toEqual(e.members);
    // float32 in the file: equal to the value written where it is exact in float32 (all of these are).
    members.forEach((m, i) => expect(m.values).toEqual(e.values_in_unit[i]));
    expect((run.json.forcings as Record<string, number[]>).precipitation).toEqual(e.precipitation);
    expect((run.json.forcings as Record<string, number[]>).air_temperature).toEqual(e.air_temperature);
    // Converted by the service's factor, against numpy's product with 0.3048³.
    members.forEach((m, i) => m.values.forEach((v, k) => expect(v * flowUnit(e.unit)!.factor).toBeCloseTo(e.values_m3s[i][k], 10)));
    expect(run.where('body.members[1].values[2]')).toBe('variable flow[realization 1 (member p02), time 2 (2008-11-04T00:00:00Z)]');
  });

  it('reads a NetCDF-4 file written by netCDF4-python (string member names, warm-up times, _FillValue as missing)', async () => {
    const run = await runFromNetcdf(readFileSync(new URL('run-netcdf4.nc', dir)), DAY);
    const e = expected.netcdf4;
    expect(run.json.issueTime).toBe(e.issueTime);
    expect(run.json.unit).toBe('m3 s-1');
    expect(run.json.warmupSteps).toBe(2);
    const members = run.json.members as { id: string; values: (number | null)[] }[];
    expect(members.map((m) => m.id)).toEqual(e.members);
    members.forEach((m, i) => expect(m.values).toEqual(e.values_m3s[i]));
    const forcings = run.json.forcings as Record<string, number[]>;
    expect(forcings.precipitation).toEqual(e.precipitation);
    // Kelvin to degrees Celsius: T(°C) = T(K) − 273.15 (SI brochure, 9th edition, 2.3.4).
    forcings.air_temperature.forEach((v, k) => expect(v).toBeCloseTo(e.air_temperature_degC[k], 9));
  });

  it('refuses a file that is not NetCDF, and one whose times are off the step, naming the variable', async () => {
    await expect(runFromNetcdf(Buffer.from('not a netcdf file'), DAY)).rejects.toThrow(Problem);
    // Read with an hourly gauge step the daily file's times do not fit.
    const err = await runFromNetcdf(readFileSync(new URL('run-classic.nc', dir)), 3600).catch((e: Problem) => e);
    expect(err).toBeInstanceOf(Problem);
    expect((err as Problem).errors[0].path).toMatch(/^variable time\[\d\]$/);
  });
});

describe('CSV run bodies', () => {
  const csv = [
    'issue_time,member,lead_time,flow (l/s),precipitation (mm)',
    '2008-11-01T00:00:00Z,p01,P1D,9500,0',
    '2008-11-01T00:00:00Z,p01,P2D,9800,4.5',
    '2008-11-01T00:00:00Z,p02,P1D,9100,0',
    '2008-11-01T00:00:00Z,p02,P2D,abc,4.5',
  ].join('\n');

  it('groups the long form by member and names lines for later problems', () => {
    const run = runFromCsv(csv, DAY);
    expect(run.json).toEqual({
      issueTime: '2008-11-01T00:00:00Z',
      unit: 'l/s',
      warmupSteps: 0,
      members: [
        { id: 'p01', values: [9500, 9800] },
        { id: 'p02', values: [9100, 'abc'] },
      ],
      forcings: { precipitation: [0, 4.5] },
    });
    expect(run.where('body.members[1].values[1]')).toBe('line 5, column flow (l/s)');
    expect(run.where('body.trajectories')).toBe('query.trajectories');
  });

  it('lists every structural problem at once', () => {
    const bad = ['issue_time,member,lead_time,flow (m3/s),precipitation (mm)', '2008-11-01T00:00:00Z,p01,P1D,9,0', '2008-11-02T00:00:00Z,p01,P3D,9,1', '2008-11-01T00:00:00Z,p02,P1D,9,2'].join('\n');
    const err = (() => {
      try {
        runFromCsv(bad, DAY);
      } catch (e) {
        return e as Problem;
      }
    })()!;
    expect(err.status).toBe(422);
    expect(err.errors.map((e) => e.path)).toEqual(['line 3, column issue_time', 'line 3, column lead_time', 'line 4, column precipitation (mm)']);
  });
});
