import { describe, expect, it } from 'vitest';
import { chooseArchive, MIN_PER_LEAD_RUNS, type ArchiveOption } from '../../src/core/stochastic/archive-choice.ts';

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
