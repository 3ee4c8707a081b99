import { describe, expect, it } from 'vitest';
import { compareForecasts, hindcastCases, runHindcast, runStochasticStage, type VerificationCase } from '../../../src/core/index.ts';
import { archiveFrom, subtractBias, synthetic } from './synthetic.ts';

const I = 6;
const H = 3;
const M = 4;
const validation = synthetic({ nIssues: 300, nLeads: H, nMembers: M, seed: 1, spread: 0.5, bias: 2 });
const archive = archiveFrom(validation, 300, H, M, 2);
const run = synthetic({ nIssues: I, nLeads: H, nMembers: M, seed: 2, spread: 0.5, bias: 2, firstDay: 400 });

describe('hindcast helper', () => {
  it('produces one case per observed lead: raw, corrected = correction(raw), and the stage run with seed + issue', () => {
    const observed = Float64Array.from(run.observed);
    observed[1 * H + 2] = NaN; // issue 1, lead 2 not observed
    const input = {
      nIssues: I,
      nMembers: M,
      nLeads: H,
      raw: run.raw,
      observed,
      dayOfYear: run.dayOfYear,
      issueTimes: Array.from({ length: I }, (_, i) => `2022-01-0${i + 1}T00:00:00Z`),
      correct: subtractBias(2),
      archive,
      stochastic: { seed: 40, nDraws: 50 },
    };
    const cases = hindcastCases(input);
    expect(cases.length).toBe(I * H - 1);
    const c = cases.find((x) => x.issueTime === '2022-01-03T00:00:00Z' && x.lead === 1)!;
    expect(c.observation).toBe(run.observed[2 * H + 1]);
    for (let m = 0; m < M; m++) {
      expect(c.raw[m]).toBe(run.raw[(2 * M + m) * H + 1]);
      expect(c.corrected[m]).toBe(run.raw[(2 * M + m) * H + 1] - 2);
    }
    // The same issue through the stage directly: seed 40 + 2, trajectories column of lead 1.
    const members = Float64Array.from(run.raw.subarray(2 * M * H, 3 * M * H), (v) => v - 2);
    const direct = runStochasticStage(
      archive,
      { members, nMembers: M, nLeads: H, dayOfYear: Array.from(run.dayOfYear.subarray(2 * H, 3 * H)) },
      { seed: 42, nDraws: 50, keepTrajectories: true },
    );
    expect(Array.from(c.stochastic as Float64Array)).toEqual(Array.from({ length: 50 }, (_, j) => direct.trajectories![j * H + 1]));
    // Copies are independent objects.
    expect(cases[0].raw).not.toBe(cases[1].raw);
  });

  it('streams cases with reused buffers and counts unobserved ones; without an archive there is no stochastic stage', () => {
    const observed: (number | null)[] = Array.from(run.observed);
    observed[0] = null;
    const seen: VerificationCase[] = [];
    const summary = runHindcast(
      { nIssues: I, nMembers: M, nLeads: H, raw: run.raw, observed, correct: subtractBias(2), archive: null },
      (c) => seen.push(c),
    );
    expect(summary).toEqual({ issues: I, cases: I * H - 1, unobserved: 1 });
    expect(seen[0]).toBe(seen[1]); // one reused object: copy to keep
    const r = compareForecasts(hindcastCases({ nIssues: I, nMembers: M, nLeads: H, raw: run.raw, observed, correct: subtractBias(2), archive: null }));
    expect(r.stochastic).toBeNull();
    expect(r.cases.used).toBe(I * H - 1);
    expect(() => runHindcast({ nIssues: I, nMembers: M, nLeads: H, raw: run.raw.subarray(1), observed, correct: subtractBias(2), archive: null }, () => {})).toThrow(RangeError);
  });
});
