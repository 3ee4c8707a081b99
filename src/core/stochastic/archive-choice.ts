/** What the choice between a version's error archives looks at. */
export interface ArchiveOption {
  /** 'updating': per-lead errors of the members after the residual model and the issue-time updater. */
  leadMode: 'lead-free' | 'per-lead' | 'updating';
  summary: Record<string, unknown>;
}

/**
 * A per-lead archive (errors of past runs at each lead time) serves a run only when it reaches the
 * run's horizon and holds at least this many past runs. With fewer, its nearest neighbours come from
 * a handful of runs (members of one run are near-duplicates): on the demo scenario, 157 weekly runs
 * gave 5–95 % bands covering 0.41–0.51 against 0.50–0.63 from the lead-free archive. The number is
 * our own rule of thumb (about a year of daily runs), not a published one; PER_LEAD_MIN_RUNS sets it.
 */
export const MIN_PER_LEAD_RUNS = 300;

/** Lead times an archive can serve: a per-lead archive its lead count, a lead-free one its template length. */
export function archiveReach(a: ArchiveOption | null): number {
  if (!a) return 0;
  return Number((a.leadMode === 'lead-free' ? a.summary.templateLength : a.summary.nLeads) ?? 0) || 0;
}

/** The archive for a run of nLeads lead times: per-lead when it reaches and is large enough, else lead-free. */
export function chooseArchive<A extends ArchiveOption>(perLead: A | null, leadFree: A | null, nLeads: number, minRuns = MIN_PER_LEAD_RUNS): A | null {
  const perLeadUsable = perLead !== null && nLeads <= archiveReach(perLead) && Number(perLead.summary.issues ?? 0) >= minRuns;
  if (perLeadUsable) return perLead;
  if (leadFree && nLeads <= archiveReach(leadFree)) return leadFree;
  if (perLead && nLeads <= archiveReach(perLead)) return perLead;
  return leadFree ?? perLead;
}

/** How an archive's errors grow with lead time, as a run's answer states it. */
export interface LeadGrowthUsed {
  /** 'past-runs': measured on stored past runs; 'none': the errors do not grow with lead. */
  source: 'past-runs' | 'none';
  note: string;
}

/**
 * Where a served archive's growth with lead time comes from. Errors of continuous simulations
 * (lead-free) and pseudo-forecasts (updating) lack the forecast-forcing error; past runs measure it
 * (lead-growth.ts, forcing-paths.ts). Without past runs nothing measures it, and the answer says so.
 * nLeads: the run's lead times (forcing paths serve only runs within their reach).
 */
export function leadGrowthOf(a: ArchiveOption, nLeads = 0): LeadGrowthUsed {
  if (a.leadMode === 'per-lead') return { source: 'past-runs', note: 'errors of stored past runs at each lead time, forecast-forcing error included' };
  const paths = a.summary.forcingPaths as { paths?: number; leadTimes?: number } | null | undefined;
  if (paths && Number(paths.paths) > 0 && nLeads <= Number(paths.leadTimes)) {
    return {
      source: 'past-runs',
      note: `errors of ${a.leadMode === 'lead-free' ? 'the continuous simulations' : 'pseudo-forecasts after updating'}, each trajectory carrying the forecast-forcing deviation of one of ${paths.paths} stored past runs`,
    };
  }
  const scale = a.leadMode === 'lead-free' ? a.summary.leadScale : a.summary.leadGrowth;
  if (Array.isArray(scale) && scale.length) {
    return {
      source: 'past-runs',
      note:
        a.leadMode === 'lead-free'
          ? 'errors of the continuous simulations, widened at each lead time by the forecast-forcing error stored past runs show'
          : 'errors of pseudo-forecasts after updating, widened at each lead time by the forecast-forcing error stored past runs show',
    };
  }
  return {
    source: 'none',
    note: `errors of ${a.leadMode === 'lead-free' ? 'the continuous simulations' : 'pseudo-forecasts after updating'}, which carry no forecast-forcing error: with no past runs stored, the bands beyond the first lead times are likely too narrow; store past runs with their forecast forcings (POST /gauges/:id/reforecasts) and refit`,
  };
}
