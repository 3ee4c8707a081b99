// Stored runs scored apart by whether they were served with issue-time updating. Unlike a hindcast,
// which scores the same issues both ways, the two groups here are different runs (updating is off
// only when no recent observation was stored, or the version has no updater), so the split says
// how each kind of served run fared, not what updating gained.
import { crpsSorted } from '../scores/crps.ts';
import { quantileSorted } from '../scores/quantile.ts';

export interface UpdatingSplitRow {
  lead: number;
  cases: number;
  /** Mean CRPS (m³/s) of the corrected members and of the stochastic stage. */
  crps: { corrected: number | null; stochastic: number | null };
  /** Share of observations inside the stochastic stage's central 95 % interval (quantiles 0.025, 0.975). */
  coverage95: number | null;
}

export interface UpdatingSplit {
  on: { runs: number; byLead: UpdatingSplitRow[] };
  off: { runs: number; byLead: UpdatingSplitRow[] };
}

interface LeadSums {
  cases: number;
  corrected: number;
  stochastic: number;
  stochasticCases: number;
  covered: number;
}

interface Sums {
  runs: number;
  /** Per lead, grown as leads arrive (runs may differ in length). */
  leads: LeadSums[];
}

export interface UpdatingSplitCollector {
  /** Counts a run in its group (once per run, whether or not any lead is observed). */
  addRun(updated: boolean): void;
  /**
   * One observed lead of a run: its corrected members and the stage's quantiles at ascending
   * levels (scored as an ensemble of those values, as the pooled comparison does).
   */
  addCase(updated: boolean, lead: number, observation: number, corrected: ArrayLike<number>, stochastic: ArrayLike<number> | null): void;
  result(): UpdatingSplit;
}

export function updatingSplit(): UpdatingSplitCollector {
  const groups: Record<'on' | 'off', Sums> = { on: { runs: 0, leads: [] }, off: { runs: 0, leads: [] } };
  const nLeads = () => Math.max(groups.on.leads.length, groups.off.leads.length);
  let buf = new Float64Array(128);
  const sorted = (v: ArrayLike<number>) => {
    if (buf.length < v.length) buf = new Float64Array(v.length);
    let n = 0;
    for (let i = 0; i < v.length; i++) if (Number.isFinite(v[i])) buf[n++] = v[i];
    // Values from run records come ascending already: one pass tells, and the sort is skipped.
    let i = 1;
    while (i < n && buf[i - 1] <= buf[i]) i++;
    return i >= n ? buf.subarray(0, n) : buf.subarray(0, n).sort();
  };
  const rows = (g: Sums, n: number): UpdatingSplitRow[] =>
    Array.from({ length: n }, (_, k) => {
      const l = g.leads[k] ?? { cases: 0, corrected: 0, stochastic: 0, stochasticCases: 0, covered: 0 };
      return {
        lead: k + 1,
        cases: l.cases,
        crps: { corrected: l.cases ? l.corrected / l.cases : null, stochastic: l.stochasticCases ? l.stochastic / l.stochasticCases : null },
        coverage95: l.stochasticCases ? l.covered / l.stochasticCases : null,
      };
    });
  return {
    addRun(updated) {
      groups[updated ? 'on' : 'off'].runs++;
    },
    addCase(updated, lead, y, corrected, stochastic) {
      if (!(Number.isInteger(lead) && lead >= 0) || !Number.isFinite(y)) return;
      const g = groups[updated ? 'on' : 'off'];
      const c = sorted(corrected);
      if (!c.length) return;
      while (g.leads.length <= lead) g.leads.push({ cases: 0, corrected: 0, stochastic: 0, stochasticCases: 0, covered: 0 });
      const l = g.leads[lead];
      l.cases++;
      l.corrected += crpsSorted(c, y);
      if (stochastic && stochastic.length) {
        const s = sorted(stochastic);
        l.stochasticCases++;
        l.stochastic += crpsSorted(s, y);
        l.covered += y >= quantileSorted(s, 0.025) && y <= quantileSorted(s, 0.975) ? 1 : 0;
      }
    },
    result() {
      const n = nLeads();
      return { on: { runs: groups.on.runs, byLead: rows(groups.on, n) }, off: { runs: groups.off.runs, byLead: rows(groups.off, n) } };
    },
  };
}
