import { describe, expect, it } from 'vitest';
import { updatingSplit } from '../../src/core/correction/updating-split.ts';

describe('stored runs scored apart by issue-time updating', () => {
  it('means the CRPS and the 95 % coverage per lead within each group', () => {
    const s = updatingSplit();
    s.addRun(true);
    s.addRun(true);
    s.addRun(false);
    // CRPS of the ensemble {1, 2, 3} at y = 2: E|X − y| − ½E|X − X'| = 2/3 − ½·8/9 = 2/9
    // (kernel form, Gneiting & Raftery 2007, eq. 20; worked by hand).
    s.addCase(true, 0, 2, [3, 1, 2], [1, 2, 3]);
    // {1, 2, 3} at y = 5: (4 + 3 + 2)/3 − 4/9 = 23/9; y outside the 2.5–97.5 % quantiles (1.05, 2.95).
    s.addCase(true, 0, 5, [1, 2, 3], [1, 2, 3]);
    s.addCase(false, 2, 2, [2, 2], null);
    const r = s.result();
    expect(r.on.runs).toBe(2);
    expect(r.off.runs).toBe(1);
    expect(r.on.byLead).toHaveLength(3);
    expect(r.on.byLead[0].cases).toBe(2);
    expect(r.on.byLead[0].crps.corrected).toBeCloseTo((2 / 9 + 23 / 9) / 2, 12);
    expect(r.on.byLead[0].crps.stochastic).toBeCloseTo((2 / 9 + 23 / 9) / 2, 12);
    expect(r.on.byLead[0].coverage95).toBe(0.5);
    expect(r.on.byLead[1]).toEqual({ lead: 2, cases: 0, crps: { corrected: null, stochastic: null }, coverage95: null });
    // Without stage quantiles only the corrected members are scored; {2, 2} at y = 2 scores 0.
    expect(r.off.byLead[2]).toEqual({ lead: 3, cases: 1, crps: { corrected: 0, stochastic: null }, coverage95: null });
  });

  it('skips cases without an observation or members', () => {
    const s = updatingSplit();
    s.addCase(true, 0, NaN, [1], [1]);
    s.addCase(true, 0, 1, [NaN], [1]);
    expect(s.result().on.byLead).toEqual([]);
  });
});
