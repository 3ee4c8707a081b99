import type { ArchiveSeries } from '../models/residual-evaluation.ts';
import { forcingUnits, readForcings, readObservations, readSimulations, type Window } from './archive-repo.ts';
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
