import type { ArchiveSeries, ReforecastSet } from '../core/archive-types.ts';
import { forcingUnits, readForcings, readObservations, readReforecastForcings, readReforecasts, readSimulations, type Window } from './archive-repo.ts';
import type { Queryable } from './db.ts';

/**
 * A gauge's archive on one regular axis spanning its member simulations (missing = NaN):
 * what fitting, evaluation and archive building read.
 */
export async function loadArchiveSeries(db: Queryable, gaugeId: string, stepSeconds: number, window: Window = {}): Promise<ArchiveSeries> {
  const sims = await readSimulations(db, gaugeId, window);
  if (!sims.length) throw new Error(`gauge ${gaugeId} has no member simulations in the archive`);
  let lo = Infinity;
  let hi = -Infinity;
  for (const r of sims) {
    if (r.t < lo) lo = r.t;
    if (r.t > hi) hi = r.t;
  }
  const stepMs = stepSeconds * 1000;
  const n = Math.round((hi - lo) / stepMs) + 1;
  const times = Float64Array.from({ length: n }, (_, i) => lo + i * stepMs);
  const at = (t: number) => Math.round((t - lo) / stepMs);
  const span: Window = { fromMs: lo, toMs: hi + 1 };

  const members = new Map<string, Float64Array>();
  for (const r of sims) {
    let v = members.get(r.member_id);
    if (!v) members.set(r.member_id, (v = new Float64Array(n).fill(NaN)));
    if (r.value !== null) v[at(r.t)] = r.value;
  }
  const observed = new Float64Array(n).fill(NaN);
  for (const r of await readObservations(db, gaugeId, span)) if (r.value !== null) observed[at(r.t)] = r.value;
  const forcings: Record<string, Float64Array> = {};
  for (const name of (await forcingUnits(db, gaugeId)).keys()) forcings[name] = new Float64Array(n).fill(NaN);
  for (const r of await readForcings(db, gaugeId, span)) if (r.value !== null) forcings[r.variable][at(r.t)] = r.value;
  return {
    stepSeconds,
    times,
    observed,
    forcings,
    members: [...members].sort(([a], [b]) => a.localeCompare(b)).map(([id, values]) => ({ id, values })),
  };
}

/**
 * A gauge's stored past runs issued in a window, as one issue × member × lead block (missing =
 * NaN), or null when there are none: what the per-lead error archives are built from.
 */
export async function loadReforecastSet(db: Queryable, gaugeId: string, window: Window): Promise<ReforecastSet | null> {
  const rows = await readReforecasts(db, gaugeId, window);
  if (!rows.length) return null;
  const issues = new Map<number, number>();
  const members = new Set<string>();
  let nLeads = 0;
  for (const r of rows) {
    if (!issues.has(r.t)) issues.set(r.t, issues.size);
    members.add(r.member_id);
    if (r.lead > nLeads) nLeads = r.lead;
  }
  // Rows come ordered by issue time, so issue indices are ascending in time.
  const memberIds = [...members].sort((a, b) => a.localeCompare(b));
  const memberIndex = new Map(memberIds.map((id, i) => [id, i]));
  const nM = memberIds.length;
  const values = new Float64Array(issues.size * nM * nLeads).fill(NaN);
  for (const r of rows) {
    if (r.value !== null) values[(issues.get(r.t)! * nM + memberIndex.get(r.member_id)!) * nLeads + r.lead - 1] = r.value;
  }
  const forcings: Record<string, Float64Array> = {};
  for (const r of await readReforecastForcings(db, gaugeId, window)) {
    const u = issues.get(r.t);
    if (u === undefined || r.lead > nLeads || r.value === null) continue;
    const f = (forcings[r.variable] ??= new Float64Array(issues.size * nLeads).fill(NaN));
    f[u * nLeads + r.lead - 1] = r.value;
  }
  return { issueTimes: Float64Array.from(issues.keys()), nLeads, memberIds, values, ...(Object.keys(forcings).length ? { forcings } : {}) };
}
