import type { WarmupSlice } from '../core/features/run-warmup.ts';
import { readForcings, readSimulations } from './archive-repo.ts';
import type { Queryable } from './db.ts';

/**
 * The archive's member simulations and forcings at issue − (steps − 1)·step … issue, for the
 * run's members (in the run's order) and the forcings a model reads: what a run too short for
 * its model's window is lengthened with. Missing = NaN; a member the archive does not hold is null.
 */
export async function loadWarmupSlice(db: Queryable, gaugeId: string, stepSeconds: number, issueMs: number, steps: number, memberIds: string[], forcingNames: string[]): Promise<WarmupSlice> {
  const stepMs = stepSeconds * 1000;
  const fromMs = issueMs - (steps - 1) * stepMs;
  const window = { fromMs, toMs: issueMs + 1 };
  const at = (t: number) => Math.round((t - fromMs) / stepMs);
  const byMember = new Map<string, Float64Array>();
  for (const r of await readSimulations(db, gaugeId, window, memberIds)) {
    let v = byMember.get(r.member_id);
    if (!v) byMember.set(r.member_id, (v = new Float64Array(steps).fill(NaN)));
    if (r.value !== null) v[at(r.t)] = r.value;
  }
  const forcings: Record<string, Float64Array> = {};
  for (const name of forcingNames) forcings[name] = new Float64Array(steps).fill(NaN);
  if (forcingNames.length) for (const r of await readForcings(db, gaugeId, window, forcingNames)) if (r.value !== null) forcings[r.variable][at(r.t)] = r.value;
  return { steps, members: memberIds.map((id) => byMember.get(id) ?? null), forcings };
}
