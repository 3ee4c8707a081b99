import { describe, expect, it } from 'vitest';
import { yearFraction } from '../../src/core/day-of-year.ts';
import { FeatureInputError } from '../../src/core/features/feature-spec.ts';
import { checkResidualSpec, inputWidth, requiredRunInputs, rowShape } from '../../src/core/features/model-inputs.ts';
import { checkSequenceSpec, type SequenceSpec } from '../../src/core/features/sequence-spec.ts';
import { continuousWindows, reforecastWindows, servingWindows } from '../../src/core/features/windows.ts';
import { observationTimeWindows } from '../../src/core/correction/updating-rows.ts';
import { updatingWarmupProblem } from '../../src/core/correction/updating.ts';

const DAY = 86_400_000;
const T0 = Date.UTC(2021, 2, 1);

const spec: SequenceSpec = checkSequenceSpec({
  version: 1,
  kind: 'sequence',
  stepSeconds: 86400,
  window: 3,
  steps: [
    { name: 'sim', transform: 'log1p', center: 1, scale: 2 },
    { name: 'precipitation' },
    { name: 'day_of_year_sin' },
  ],
});

function catchFeatureError(fn: () => unknown): FeatureInputError {
  try {
    fn();
  } catch (e) {
    if (e instanceof FeatureInputError) return e;
    throw e;
  }
  throw new Error('expected a FeatureInputError');
}

// The window of the spec above ending at index t, written out by hand from its definition:
// steps t−2, t−1, t (oldest first), each [ (log1p(sim) − 1)/2, precipitation, sin(2π·yearFraction) ].
function byHand(sim: number[], prec: number[], times: number[], t: number): number[] {
  const out: number[] = [];
  for (const i of [t - 2, t - 1, t]) out.push((Math.log1p(sim[i]) - 1) / 2, prec[i], Math.sin(2 * Math.PI * yearFraction(times[i])));
  return out.map(Math.fround);
}

describe('sequence spec', () => {
  it('fills defaults, keeps the order, and states the tensor shape and run inputs', () => {
    expect(spec.steps[1]).toEqual({ name: 'precipitation', transform: 'none', center: 0, scale: 1 });
    expect(rowShape(spec)).toEqual([3, 3]);
    expect(inputWidth(spec)).toBe(9);
    expect(requiredRunInputs(spec)).toEqual({
      stepSeconds: 86400,
      simStepsToIssue: 2,
      forcings: [{ name: 'precipitation', stepsToIssue: 2 }],
      issueObservation: false,
      firstContinuousIndex: 2,
    });
    expect(checkResidualSpec(spec)).toEqual(spec);
  });

  it('names the field of a bad spec', () => {
    const bad = (patch: Record<string, unknown>) => catchFeatureError(() => checkSequenceSpec({ ...spec, ...patch })).path;
    expect(bad({ window: 0 })).toBe('spec.window');
    expect(bad({ steps: [] })).toBe('spec.steps');
    expect(bad({ steps: [{ name: 'sim' }, { name: 'sim' }] })).toBe('spec.steps[1].name');
    expect(bad({ steps: [{ name: 'sim', scale: 0 }] })).toBe('spec.steps[0].scale');
    expect(bad({ steps: [{ name: 'sim', transform: 'sqrt' }] })).toBe('spec.steps[0].transform');
    expect(bad({ steps: [{ name: 'sim', lags: 2 }] })).toBe('spec.steps[0].lags');
    expect(bad({ simLags: 3 })).toBe('spec.simLags');
  });
});

describe('windows', () => {
  const n = 12;
  const times = Array.from({ length: n }, (_, i) => T0 + i * DAY);
  const sim = Array.from({ length: n }, (_, i) => 10 + i);
  const prec = Array.from({ length: n }, (_, i) => (i * 7) % 5);
  const obs = sim.map((s, i) => s + 0.5 * i);

  it('continuous: one window ending at every time with a target, values as defined', () => {
    const obsGap = obs.slice();
    obsGap[6] = NaN;
    const w = continuousWindows(spec, { times, sim, obs: obsGap, forcings: { precipitation: prec } });
    expect(Array.from(w.index)).toEqual([2, 3, 4, 5, 7, 8, 9, 10, 11]);
    expect(w.nFeatures).toBe(9);
    for (let r = 0; r < w.nRows; r++) {
      expect(Array.from(w.rows.subarray(r * 9, (r + 1) * 9))).toEqual(byHand(sim, prec, times, w.index[r]));
      expect(w.target[r]).toBeCloseTo(0.5 * w.index[r], 12);
    }
  });

  it('continuous: a missing input inside the window drops exactly the windows that read it', () => {
    const p = prec.slice();
    p[5] = NaN;
    const w = continuousWindows(spec, { times, sim, obs, forcings: { precipitation: p } });
    expect(Array.from(w.index)).toEqual([2, 3, 4, 8, 9, 10, 11]);
  });

  it('serving: lead 1 of a run issued at t − 1 is the continuous window at t (one builder for both)', () => {
    const cont = continuousWindows(spec, { times, sim, obs, forcings: { precipitation: prec } });
    // Issue at index 6; 2 warm-up values up to issue time, then 4 lead times (indices 7..10).
    const issueAt = 6;
    const run = { issueTime: times[issueAt], nLeads: 4, members: [sim.slice(issueAt - 1, issueAt + 5), sim.map((v) => v * 2).slice(issueAt - 1, issueAt + 5)], forcings: { precipitation: prec.slice(issueAt - 1, issueAt + 5) } };
    const w = servingWindows(spec, run);
    expect(w.nRows).toBe(8);
    for (let k = 1; k <= 4; k++) {
      const r = cont.index.indexOf(issueAt + k);
      expect(Array.from(w.rows.subarray((k - 1) * 9, k * 9))).toEqual(Array.from(cont.rows.subarray(r * 9, (r + 1) * 9)));
    }
    const sim2 = sim.map((v) => v * 2);
    expect(Array.from(w.rows.subarray(4 * 9 + 2 * 9, 4 * 9 + 3 * 9))).toEqual(byHand(sim2, prec, times, issueAt + 3));
  });

  it('serving: a short series and a missing value are named', () => {
    const run = { issueTime: times[6], nLeads: 4, members: [sim.slice(6, 11)], forcings: { precipitation: prec.slice(5, 11) } };
    expect(catchFeatureError(() => servingWindows(spec, run)).path).toBe('members[0].values');
    const gap = sim.slice(5, 11);
    gap[3] = NaN;
    expect(catchFeatureError(() => servingWindows(spec, { ...run, members: [gap] })).path).toBe('members[0].values[3]');
    expect(catchFeatureError(() => servingWindows(spec, { ...run, members: [sim.slice(5, 11)], forcings: {} })).path).toBe('forcings.precipitation');
    const pm = [prec.slice(5, 11), prec.slice(5, 11)];
    pm[1] = pm[1].slice();
    pm[1][4] = NaN;
    expect(catchFeatureError(() => servingWindows(spec, { ...run, members: [sim.slice(5, 11), sim.slice(5, 11)], forcings: { precipitation: pm } })).path).toBe('forcings.precipitation[1][4]');
  });

  it('reforecast: windows like serving, targets from the observations at the leads', () => {
    const run = { issueTime: times[6], nLeads: 4, members: [sim.slice(5, 11)], forcings: { precipitation: prec.slice(5, 11) }, obs: [obs[7], NaN, obs[9], obs[10]] };
    const w = reforecastWindows(spec, [run]);
    expect(Array.from(w.lead)).toEqual([1, 3, 4]);
    expect(Array.from(w.rows.subarray(9, 18))).toEqual(byHand(sim, prec, times, 9));
    expect(w.target[1]).toBeCloseTo(obs[9] - sim[9], 12);
  });
});

describe('warm-up from the archive', () => {
  it('puts archived values in front of a short run so the windows equal the continuous ones', async () => {
    const { fillWarmup, warmupGap } = await import('../../src/core/features/run-warmup.ts');
    const n = 14;
    const times = Array.from({ length: n }, (_, i) => T0 + i * DAY);
    const sim = Array.from({ length: n }, (_, i) => 5 + i * i * 0.1);
    const prec = Array.from({ length: n }, (_, i) => (i * 3) % 4);
    const wide = checkSequenceSpec({ ...spec, window: 6 });
    const cont = continuousWindows(wide, { times, sim, obs: sim, forcings: { precipitation: prec } });
    // Issued at index 8 with one warm-up value (the issue-time one); the window needs 5.
    const need = requiredRunInputs(wide);
    expect(need.simStepsToIssue).toBe(5);
    // The archive slice: 5 values at issue − 4 … issue.
    const simSeries = { values: sim.slice(8, 12), needed: 5, wanted: 5, archived: sim.slice(4, 9) };
    expect(warmupGap(simSeries, 3)).toBe(true);
    const member = fillWarmup(simSeries, 3, 5);
    expect(Array.from(member.values)).toEqual(sim.slice(4, 12));
    expect(member.taken).toEqual([1, 2, 3, 4]);
    expect(member.missing).toEqual([]);
    const precipitation = fillWarmup({ values: prec.slice(9, 12), needed: 5, wanted: 5, archived: prec.slice(4, 9) }, 3, 5);
    const longer = { issueTime: times[8], nLeads: 3, members: [member.values], forcings: { precipitation: precipitation.values } };
    expect(warmupGap({ ...simSeries, values: member.values }, 3)).toBe(false);
    const w = servingWindows(wide, longer);
    for (let k = 1; k <= 3; k++) {
      const r = cont.index.indexOf(8 + k);
      expect(Array.from(w.rows.subarray((k - 1) * 18, k * 18))).toEqual(Array.from(cont.rows.subarray(r * 18, (r + 1) * 18)));
    }
    // Values the run gives win over the archive's; a gap in the run's warm-up is filled from it;
    // a needed value neither has is reported by its steps before issue.
    const given = fillWarmup({ ...simSeries, values: [99, NaN, ...sim.slice(8, 12)] }, 3, 5);
    expect(Array.from(given.values).slice(0, 5)).toEqual([sim[4], sim[5], 99, sim[7], sim[8]]);
    expect(given.taken).toEqual([1, 3, 4]);
    const holes = fillWarmup({ ...simSeries, archived: [NaN, sim[5], NaN, sim[7], sim[8]] }, 3, 5);
    expect(holes.missing).toEqual([2, 4]);
  });
});

describe('windows at the observation time (issue-time updating of sequence models)', () => {
  const n = 14;
  const times = Array.from({ length: n }, (_, i) => T0 + i * DAY);
  const sim = Array.from({ length: n }, (_, i) => 10 + i);
  const prec = Array.from({ length: n }, (_, i) => (i * 7) % 5);
  // A run issued at index 9 with 4 lead times; its series hold indices 0 … 13.
  const run = { issueTime: times[9], nLeads: 4, members: [sim, sim.map((v) => v + 1)], forcings: { precipitation: prec } };

  it('for each member: the window ending ageSteps before issue, as defined (worked by hand)', () => {
    for (const age of [0, 2]) {
      const w = observationTimeWindows(spec, run, age);
      expect(w.nRows).toBe(2);
      expect(Array.from(w.rows.subarray(0, 9))).toEqual(byHand(sim, prec, times, 9 - age));
      expect(Array.from(w.rows.subarray(9, 18))).toEqual(byHand(run.members[1], prec, times, 9 - age));
      expect(Array.from(w.simAt)).toEqual([sim[9 - age], sim[9 - age] + 1]);
    }
  });

  it('the warm-up a sequence model needs for it, and a missing value named in the run', () => {
    expect(updatingWarmupProblem(spec, 3, 0)).toBeNull();
    expect(updatingWarmupProblem(spec, 4, 2)).toMatch(/needs 5/);
    const gap = sim.slice();
    gap[7] = NaN;
    expect(catchFeatureError(() => observationTimeWindows(spec, { ...run, members: [gap] }, 1)).path).toBe('members[0].values[7]');
  });
});
