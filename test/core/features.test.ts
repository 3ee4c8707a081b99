import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { yearFraction } from '../../src/core/day-of-year.ts';
import {
  FeatureInputError,
  checkFeatureSpec,
  continuousRows,
  featureNames,
  makeFeatureSpec,
  reforecastRows,
  requiredInputs,
  servingRows,
} from '../../src/core/features/features.ts';
import type { FeatureSpec, RunInput } from '../../src/core/features/features.ts';

const DAY = 86_400_000;
const T0 = Date.UTC(2021, 0, 1);

// Hand-built case used by several tests below.
const spec: FeatureSpec = makeFeatureSpec({
  stepSeconds: 86400,
  simLags: 2,
  forcings: [{ name: 'precipitation', lags: 1 }],
  seasonal: false,
  leadTime: true,
  issueError: true,
});

function rowsOf(flat: Float32Array, nF: number): number[][] {
  const out: number[][] = [];
  for (let i = 0; i < flat.length; i += nF) out.push(Array.from(flat.subarray(i, i + nF)));
  return out;
}

function catchFeatureError(fn: () => unknown): FeatureInputError {
  try {
    fn();
  } catch (e) {
    if (e instanceof FeatureInputError) return e;
    throw e;
  }
  throw new Error('expected a FeatureInputError');
}

describe('feature spec', () => {
  it('names columns in a stable order', () => {
    expect(featureNames(spec)).toEqual([
      'sim_lag0', 'sim_lag1', 'sim_lag2', 'precipitation_lag0', 'precipitation_lag1', 'lead_hours', 'issue_error',
    ]);
    const full = makeFeatureSpec({ stepSeconds: 86400, forcings: [{ name: 'air_temperature', lags: 0 }] });
    expect(featureNames(full)).toEqual([
      ...Array.from({ length: 10 }, (_, j) => `sim_lag${j}`),
      'air_temperature_lag0', 'day_of_year_sin', 'day_of_year_cos',
    ]);
  });

  it('states what a run must provide', () => {
    expect(requiredInputs(spec)).toEqual({
      stepSeconds: 86400,
      simStepsToIssue: 2,
      forcings: [{ name: 'precipitation', stepsToIssue: 1 }],
      issueObservation: true,
      firstContinuousIndex: 2,
    });
    // issue error alone still needs the simulated value at issue time
    const s = makeFeatureSpec({ stepSeconds: 3600, simLags: 0, seasonal: false, issueError: true });
    expect(requiredInputs(s).simStepsToIssue).toBe(1);
  });

  it('survives a JSON round trip and rejects bad specs with a path', () => {
    expect(checkFeatureSpec(JSON.parse(JSON.stringify(spec)))).toEqual(spec);
    expect(catchFeatureError(() => checkFeatureSpec({ ...spec, simLags: -1 })).path).toBe('spec.simLags');
    expect(catchFeatureError(() => checkFeatureSpec({ ...spec, forcings: [{ name: 'sim', lags: 0 }] })).path).toBe(
      'spec.forcings',
    );
    expect(catchFeatureError(() => checkFeatureSpec({ ...spec, forcings: [{ name: '', lags: 0 }] })).path).toBe(
      'spec.forcings[0].name',
    );
  });
});

describe('seasonal features', () => {
  // Calendar facts: 2021 has 365 days, 2020 has 366.
  it('is 0 on 1 January and follows the real year length', () => {
    expect(yearFraction(Date.UTC(2021, 0, 1))).toBe(0);
    expect(yearFraction(Date.UTC(2021, 3, 2, 6))).toBeCloseTo(91.25 / 365, 15); // 1 Jan + 91.25 d
    expect(yearFraction(Date.UTC(2020, 6, 2))).toBeCloseTo(183 / 366, 15);
    expect(yearFraction(Date.UTC(1969, 11, 31, 12))).toBeCloseTo(364.5 / 365, 15);
    expect(yearFraction(Date.UTC(2021, 11, 31, 23, 59))).toBeLessThan(1);
  });

  it('writes sine and cosine of the year angle', () => {
    const s = makeFeatureSpec({ stepSeconds: 21600, simLags: 0 });
    const times = [Date.UTC(2021, 3, 2, 0), Date.UTC(2021, 3, 2, 6)];
    const r = continuousRows(s, { times, sim: [1, 2], obs: [1, 2] });
    expect(r.nRows).toBe(2);
    // row 1 is a quarter year after 1 January: sin = 1, cos = 0 (float32)
    expect(r.rows[4]).toBeCloseTo(1, 6);
    expect(r.rows[5]).toBeCloseTo(0, 6);
  });
});

describe('continuous training rows', () => {
  it('builds exact rows and skips missing inputs and targets', () => {
    const times = Array.from({ length: 6 }, (_, i) => T0 + i * DAY);
    const sim = new Float64Array([10, 11, 12, 13, 14, 15]);
    const precipitation = new Float64Array([0, 1, 2, 3, 4, 5]);
    const obs = new Float64Array([9, 12, NaN, 15, 13, 16]);
    const r = continuousRows(spec, { times, sim, forcings: { precipitation }, obs });
    // t=2: target missing; t=3: issue error needs obs[2] (missing); t=4, t=5 kept.
    expect(rowsOf(r.rows, r.nFeatures)).toEqual([
      [14, 13, 12, 4, 3, 0, 15 - 13],
      [15, 14, 13, 5, 4, 0, 13 - 14],
    ]);
    expect(Array.from(r.target)).toEqual([13 - 14, 16 - 15]);
    expect(Array.from(r.index)).toEqual([4, 5]);
  });

  it('names the bad field', () => {
    const times = [T0, T0 + DAY, T0 + 3 * DAY];
    const base = { times, sim: [1, 2, 3], obs: [1, 2, 3], forcings: { precipitation: [0, 0, 0] } };
    expect(catchFeatureError(() => continuousRows(spec, base)).path).toBe('times[2]');
    const regular = { ...base, times: [T0, T0 + DAY, T0 + 2 * DAY] };
    expect(catchFeatureError(() => continuousRows(spec, { ...regular, forcings: {} })).path).toBe(
      'forcings.precipitation',
    );
    expect(catchFeatureError(() => continuousRows(spec, { ...regular, obs: [1] })).path).toBe('obs');
  });
});

const run: RunInput = {
  issueTime: T0 + 3 * DAY,
  nLeads: 2,
  members: [new Float64Array([11, 12, 13, 20, 21]), [1, 2, 3, 4, 5, 6, 7]], // member 1: longer warm-up
  forcings: { precipitation: [2, 3, 7, 8] },
  issueObservation: 15,
};

describe('serving rows', () => {
  it('builds all members × lead times in one batch', () => {
    const r = servingRows(spec, run);
    expect([r.nRows, r.nFeatures, r.nMembers, r.nLeads]).toEqual([4, 7, 2, 2]);
    expect(rowsOf(r.rows, r.nFeatures)).toEqual([
      [20, 13, 12, 7, 3, 24, 15 - 13],
      [21, 20, 13, 8, 7, 48, 15 - 13],
      [6, 5, 4, 7, 3, 24, 15 - 5],
      [7, 6, 5, 8, 7, 48, 15 - 5],
    ]);
  });

  it('accepts one forcing series per member and a reused buffer', () => {
    const out = new Float32Array(100);
    const r = servingRows(spec, { ...run, forcings: { precipitation: [[0, 3, 7, 8], [9, 9, 1, 2]] } }, out);
    expect(r.rows.buffer).toBe(out.buffer);
    expect(rowsOf(r.rows, r.nFeatures).map((row) => row.slice(3, 5))).toEqual([[7, 3], [8, 7], [1, 9], [2, 1]]);
  });

  it('ignores missing values outside the needed window', () => {
    const r = servingRows(spec, { ...run, members: [[NaN, 12, 13, 20, 21]] });
    expect(r.nRows).toBe(2);
  });

  it('names the missing field', () => {
    const cases: [Partial<RunInput>, string][] = [
      [{ members: [[11, 12, 13, 20, 21], [5, 6, 7]] }, 'members[1].values'],
      [{ members: [[11, 12, NaN, 20, 21]] }, 'members[0].values[2]'],
      [{ members: [[11, 12, 13, 20, null as unknown as number]] }, 'members[0].values[4]'],
      [{ members: [] }, 'members'],
      [{ forcings: {} }, 'forcings.precipitation'],
      [{ forcings: { precipitation: [3, 7, 8, NaN] } }, 'forcings.precipitation[3]'],
      [{ forcings: { precipitation: [7, 8] } }, 'forcings.precipitation'],
      [{ forcings: { precipitation: [[3, 7, 8]] } }, 'forcings.precipitation'],
      [{ forcings: { precipitation: [[3, 7, 8], [3, NaN, 8]] } }, 'forcings.precipitation[1][1]'],
      [{ issueObservation: null }, 'issueObservation'],
      [{ nLeads: 0 }, 'nLeads'],
    ];
    for (const [patch, path] of cases) {
      const e = catchFeatureError(() => servingRows(spec, { ...run, ...patch }));
      expect(e.path, JSON.stringify(patch)).toBe(path);
      expect(e.message).toContain(path);
    }
  });
});

describe('reforecast training rows', () => {
  it('equals serving rows, with targets at the leads, skipping missing ones', () => {
    const r = reforecastRows(spec, [
      { ...run, obs: [22, NaN] },
      { ...run, issueObservation: null, obs: [1, 1] }, // no issue error: all rows skipped
    ]);
    const s = servingRows(spec, run);
    const all = rowsOf(s.rows, s.nFeatures);
    expect(rowsOf(r.rows, r.nFeatures)).toEqual([all[0], all[2]]);
    expect(Array.from(r.target)).toEqual([22 - 20, 22 - 6]);
    expect([Array.from(r.issue), Array.from(r.member), Array.from(r.lead)]).toEqual([[0, 0], [0, 1], [1, 1]]);
    expect(catchFeatureError(() => reforecastRows(spec, [{ ...run, obs: [1] }])).path).toBe('issues[0].obs');
    expect(catchFeatureError(() => reforecastRows(spec, [{ ...run, forcings: {}, obs: [1, 1] }])).path).toBe(
      'issues[0].forcings.precipitation',
    );
  });
});

describe('training and serving agree on the same data (property)', () => {
  const specArb = fc.record({
    stepSeconds: fc.constantFrom(3600, 86400),
    simLags: fc.integer({ min: 0, max: 4 }),
    forcings: fc.subarray([
      { name: 'precipitation', lags: 0 },
      { name: 'air_temperature', lags: 0 },
    ]).chain((fs) => fc.tuple(...fs.map((f) => fc.integer({ min: 0, max: 3 }).map((lags) => ({ ...f, lags }))))),
    seasonal: fc.boolean(),
    leadTime: fc.boolean(),
    issueError: fc.boolean(),
  });
  const n = 24;
  const series = fc.array(fc.double({ min: -50, max: 500, noNaN: true }), { minLength: n, maxLength: n });

  it('continuous, reforecast and serving rows coincide', () => {
    fc.assert(
      fc.property(
        specArb, series, series, series, series, series,
        fc.integer({ min: 0, max: 1000 }), fc.integer({ min: 1, max: 5 }), fc.integer({ min: 0, max: 3 }),
        (opts, sim0, sim1, obs, p, a, issuePick, nLeadsPick, extraPick) => {
          const s = makeFeatureSpec(opts);
          const need = requiredInputs(s);
          const stepMs = s.stepSeconds * 1000;
          const times = Array.from({ length: n }, (_, i) => T0 + 7 * DAY + i * stepMs);
          const forcings = { precipitation: p, air_temperature: a };
          // issue index i0 so that continuous rows exist at i0+1… and warm-up fits in the series
          const lo = Math.max(need.firstContinuousIndex, need.simStepsToIssue);
          const nLeads = Math.min(nLeadsPick, n - 1 - lo);
          const i0 = lo + (issuePick % (n - nLeads - lo));
          const warm = Math.max(need.simStepsToIssue, ...need.forcings.map((f) => f.stepsToIssue));
          const extra = Math.min(extraPick, i0 + 1 - warm);
          const window = (x: number[]): Float64Array => Float64Array.from(x.slice(i0 + 1 - warm - extra, i0 + 1 + nLeads));
          const runInput: RunInput = {
            issueTime: times[i0],
            nLeads,
            members: [window(sim0), window(sim1)],
            forcings: { precipitation: window(p), air_temperature: window(a) },
            issueObservation: obs[i0],
          };
          const served = servingRows(s, runInput);
          const refc = reforecastRows(s, [{ ...runInput, obs: obs.slice(i0 + 1, i0 + 1 + nLeads) }]);
          expect(refc.rows).toEqual(served.rows);
          const names = featureNames(s);
          [sim0, sim1].forEach((sim, m) => {
            const cont = continuousRows(s, { times, sim, forcings, obs });
            for (let k = 1; k <= nLeads; k++) {
              const c = cont.index.indexOf(i0 + k);
              expect(c).toBeGreaterThanOrEqual(0);
              const r = m * nLeads + k - 1;
              expect(refc.target[r]).toBe(cont.target[c]);
              names.forEach((name, j) => {
                const sv = served.rows[r * names.length + j];
                const cv = cont.rows[c * names.length + j];
                // Only the lead column, and issue error beyond lead 1, differ by design.
                if (name === 'lead_hours') expect([cv, sv]).toEqual([0, (k * s.stepSeconds) / 3600]);
                else if (name !== 'issue_error' || k === 1) expect(sv, name).toBe(cv);
              });
            }
          });
        },
      ),
      { numRuns: 150, seed: 20240611 },
    );
  });
});
