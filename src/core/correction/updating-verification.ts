// Per-lead verification of issue-time updating: the same hindcast cases scored without and with
// updating, so a forecaster sees at which lead the gain falls below its sampling error.
import { crpsSorted } from '../scores/crps.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { pairedLeadDifference } from './updating.ts';
import type { VerificationCase } from '../verification/case.ts';

export interface UpdatingLeadRow {
  lead: number;
  cases: number;
  /** Mean CRPS (m³/s): raw members, corrected members (no updating), updated members, and the stochastic stage without and with updating. */
  crps: { raw: number | null; corrected: number | null; updated: number | null; stochastic: number | null; stochasticUpdated: number | null };
  /** Stochastic stage: CRPS without minus with updating, its standard error (batch means over issues), and the relative reduction. */
  gain: { mean: number | null; se: number | null; relative: number | null };
  /** Share of observations inside the stochastic stage's central 95 % interval (quantiles 0.025 and 0.975). */
  coverage95: { stochastic: number | null; stochasticUpdated: number | null };
}

export interface UpdatingByLead {
  method: string;
  issuesWithoutObservation: number;
  byLead: UpdatingLeadRow[];
  note: string;
}

export interface UpdatingPassCollector {
  add(c: VerificationCase, issue: number): void;
  compare(withUpdating: UpdatingPassCollector, info: { method: string; issuesWithoutObservation: number }): UpdatingByLead;
  /** Per (issue, lead) values, NaN where no case: [issue·nLeads + lead]. */
  readonly raw: Float64Array;
  readonly corrected: Float64Array;
  readonly stochastic: Float64Array;
  readonly covered: Float64Array;
}

function sortedCopy(v: ArrayLike<number | null>, buf: Float64Array): Float64Array {
  let n = 0;
  for (let i = 0; i < v.length; i++) {
    const x = v[i];
    if (x !== null && Number.isFinite(x)) buf[n++] = x;
  }
  return buf.subarray(0, n).sort();
}

export function updatingPassScores(nIssues: number, nLeads: number): UpdatingPassCollector {
  const size = nIssues * nLeads;
  const raw = new Float64Array(size).fill(NaN);
  const corrected = new Float64Array(size).fill(NaN);
  const stochastic = new Float64Array(size).fill(NaN);
  const covered = new Float64Array(size).fill(NaN);
  let buf = new Float64Array(1024);
  const mean = (a: Float64Array, k: number) => {
    let s = 0;
    let n = 0;
    for (let u = 0; u < nIssues; u++) {
      const x = a[u * nLeads + k];
      if (Number.isFinite(x)) {
        s += x;
        n++;
      }
    }
    return n ? s / n : null;
  };
  const self: UpdatingPassCollector = {
    raw,
    corrected,
    stochastic,
    covered,
    add(c, issue) {
      const y = c.observation;
      if (y === null || !Number.isFinite(y)) return;
      const cell = issue * nLeads + c.lead;
      const need = Math.max(c.raw.length, c.corrected.length, c.stochastic?.length ?? 0);
      if (buf.length < need) buf = new Float64Array(need);
      raw[cell] = crpsSorted(sortedCopy(c.raw, buf), y);
      corrected[cell] = crpsSorted(sortedCopy(c.corrected, buf), y);
      if (c.stochastic) {
        const s = sortedCopy(c.stochastic, buf);
        stochastic[cell] = crpsSorted(s, y);
        covered[cell] = y >= quantileSorted(s, 0.025) && y <= quantileSorted(s, 0.975) ? 1 : 0;
      }
    },
    compare(w, info) {
      const diff = pairedLeadDifference(stochastic, w.stochastic, nIssues, nLeads);
      const byLead = Array.from({ length: nLeads }, (_, k) => {
        let cases = 0;
        for (let u = 0; u < nIssues; u++) if (Number.isFinite(stochastic[u * nLeads + k]) && Number.isFinite(w.stochastic[u * nLeads + k])) cases++;
        const without = mean(stochastic, k);
        return {
          lead: k + 1,
          cases,
          crps: { raw: mean(raw, k), corrected: mean(corrected, k), updated: mean(w.corrected, k), stochastic: without, stochasticUpdated: mean(w.stochastic, k) },
          gain: { mean: diff[k].mean, se: diff[k].se, relative: without && diff[k].mean !== null ? diff[k].mean / without : null },
          coverage95: { stochastic: mean(covered, k), stochasticUpdated: mean(w.covered, k) },
        };
      });
      return {
        ...info,
        byLead,
        note: 'Both passes score the same issues and lead times. The gain is the stochastic stage\'s CRPS without minus with updating (positive = updating helps); its standard error comes from 20 batches of consecutive issues.',
      };
    },
  };
  return self;
}
