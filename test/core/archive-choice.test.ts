import { describe, expect, it } from 'vitest';
import { chooseArchive, leadGrowthOf, MIN_PER_LEAD_RUNS, type ArchiveOption } from '../../src/core/stochastic/archive-choice.ts';

const perLead = (issues: number, nLeads = 10): ArchiveOption => ({ leadMode: 'per-lead', summary: { nLeads, issues } });
const leadFree = (templateLength = 30): ArchiveOption => ({ leadMode: 'lead-free', summary: { templateLength } });

describe('choosing the error archive for a run', () => {
  it('uses a per-lead archive with enough past runs within its lead times', () => {
    const p = perLead(MIN_PER_LEAD_RUNS);
    expect(chooseArchive(p, leadFree(), 10)).toBe(p);
  });

  it('keeps to the lead-free archive while the per-lead one holds few past runs', () => {
    const f = leadFree();
    expect(chooseArchive(perLead(MIN_PER_LEAD_RUNS - 1), f, 10)).toBe(f);
    const p = perLead(157);
    expect(chooseArchive(p, f, 10, 100)).toBe(p);
  });

  it('uses the lead-free archive beyond the per-lead lead times, and whatever reaches when only one does', () => {
    const f = leadFree(30);
    expect(chooseArchive(perLead(1000), f, 15)).toBe(f);
    const small = perLead(5, 10);
    expect(chooseArchive(small, leadFree(5), 8)).toBe(small);
    expect(chooseArchive(small, null, 8)).toBe(small);
    expect(chooseArchive(null, f, 8)).toBe(f);
  });
});

describe('where the errors growth with lead time comes from', () => {
  it('past runs measure it; continuous simulations and pseudo-forecasts alone do not', () => {
    expect(leadGrowthOf({ leadMode: 'per-lead', summary: {} }).source).toBe('past-runs');
    expect(leadGrowthOf({ leadMode: 'lead-free', summary: { leadScale: [1, 1.2] } }).source).toBe('past-runs');
    expect(leadGrowthOf({ leadMode: 'lead-free', summary: { leadScale: null } })).toEqual({ source: 'none', note: expect.stringMatching(/continuous simulations, which carry no forecast-forcing error/) });
    expect(leadGrowthOf({ leadMode: 'updating', summary: { leadGrowth: [1, 1.5] } }).note).toMatch(/pseudo-forecasts after updating, widened/);
    expect(leadGrowthOf({ leadMode: 'updating', summary: { leadGrowth: null } }).source).toBe('none');
  });

  it('names the forcing paths for runs within their reach, and the lead scale beyond it', () => {
    const a: ArchiveOption = { leadMode: 'updating', summary: { leadGrowth: [1, 1.5], forcingPaths: { paths: 212, leadTimes: 10 } } };
    expect(leadGrowthOf(a, 10)).toEqual({ source: 'past-runs', note: expect.stringMatching(/forecast-forcing deviation of one of 212 stored past runs/) });
    expect(leadGrowthOf(a, 11).note).toMatch(/widened at each lead time/);
    expect(leadGrowthOf({ leadMode: 'lead-free', summary: { leadScale: null, forcingPaths: { paths: 5, leadTimes: 3 } } }, 4).source).toBe('none');
  });
});
