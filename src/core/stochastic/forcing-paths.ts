import { forwardTransform, type ErrorTransform } from './error-transform.ts';
import type { Prng } from '../prng.ts';

/**
 * Forecast-forcing deviation paths.
 *
 * An archive of continuous-simulation errors (or of pseudo-forecasts) holds what the model gets
 * wrong when driven by observed weather. A real run is driven by forecast weather, and the part of
 * its error that comes from the forecast forcings is, per lead h,
 *   δ_h = T(corrected member driven by observed forcings) − T(corrected member driven by the forecast),
 * in the archive's transform space, so that T(observed) − T(forecast) = (archived error) + δ_h.
 * Stored past runs measure δ without any observation: each past run is compared with the same
 * issue re-run on its members' continuous simulations and the observed forcings. One path per past
 * run, the mean of δ over its members (forcing error is shared by the members of a run), keeps
 * what a variance scale loses: its mean (forecast weather is not unbiased for flow), its skew (a
 * missed storm), and its persistence over the horizon.
 *
 * The stage gives each trajectory one path, drawn at random among the past runs whose key (the
 * mean over members and leads of T(corrected forecast)) is nearest the run's own, and adds it at
 * every lead, after the Schaake shuffle of the archived errors.
 */
export interface ForcingPaths {
  /** Leads each path covers. */
  nLeads: number;
  /** One key per path: mean over members and leads of T(corrected forecast member). */
  key: Float64Array;
  /** δ per path and lead, [path·nLeads + lead], transform space. */
  values: Float64Array;
}

export interface ForcingPathInput {
  /** Corrected past-run members, [(issue·nMembers + member)·nLeads + lead] (NaN = none). */
  forecast: ArrayLike<number>;
  /** The same cells re-run on the members' continuous simulations with observed forcings. */
  simulated: ArrayLike<number>;
  nIssues: number;
  nMembers: number;
  nLeads: number;
  transform: ErrorTransform;
}

/**
 * One path per past run whose every lead has at least one member with both values; a lead's δ is
 * the mean over those members of T(simulated) − T(forecast). Runs with a lead missing are left out.
 */
export function forcingDeviationPaths(input: ForcingPathInput): ForcingPaths {
  const { forecast, simulated, nIssues, nMembers: M, nLeads: H, transform } = input;
  if (forecast.length !== nIssues * M * H || simulated.length !== forecast.length) {
    throw new RangeError(`forecast and simulated must each hold nIssues × nMembers × nLeads = ${nIssues * M * H} values`);
  }
  const keys: number[] = [];
  const values: number[] = [];
  const path = new Float64Array(H);
  for (let u = 0; u < nIssues; u++) {
    let complete = true;
    let keySum = 0;
    let keyN = 0;
    for (let h = 0; h < H && complete; h++) {
      let s = 0;
      let n = 0;
      for (let m = 0; m < M; m++) {
        const i = (u * M + m) * H + h;
        const f = forecast[i];
        const c = simulated[i];
        if (!Number.isFinite(f) || !Number.isFinite(c)) continue;
        const tf = forwardTransform(transform, f);
        s += forwardTransform(transform, c) - tf;
        keySum += tf;
        keyN++;
        n++;
      }
      if (n === 0) complete = false;
      else path[h] = s / n;
    }
    if (!complete) continue;
    keys.push(keySum / keyN);
    for (let h = 0; h < H; h++) values.push(path[h]);
  }
  return { nLeads: H, key: Float64Array.from(keys), values: Float64Array.from(values) };
}

/** The key of a run: mean over its members and leads of T(corrected member); layout [member·nLeads + lead]. */
export function runPathKey(members: ArrayLike<number>, nLeads: number, transform: ErrorTransform): number {
  let s = 0;
  for (let i = 0; i < members.length; i++) s += forwardTransform(transform, members[i]);
  return members.length ? s / members.length : NaN;
}

/** Paths drawn from: the round(√P) nearest by key (common practice for kNN resampling, Lall & Sharma 1996). */
export function pathNeighbourCount(nPaths: number): number {
  return Math.max(1, Math.min(nPaths, Math.round(Math.sqrt(nPaths))));
}

/**
 * A path index for each of nDraws trajectories: uniform among the k paths whose keys are nearest
 * `key`; paths at equal distance are ordered at random (seeded), never by their stored order.
 */
export function drawForcingPaths(paths: ForcingPaths, key: number, nDraws: number, rng: Prng, out: Int32Array = new Int32Array(nDraws)): Int32Array {
  const P = paths.key.length;
  if (P === 0) throw new RangeError('no forcing paths to draw from');
  const k = pathNeighbourCount(P);
  const tie = new Float64Array(P);
  for (let p = 0; p < P; p++) tie[p] = rng.nextFloat();
  const order = Array.from({ length: P }, (_, p) => p);
  const dist = (p: number) => Math.abs(paths.key[p] - key);
  order.sort((a, b) => dist(a) - dist(b) || tie[a] - tie[b]);
  for (let j = 0; j < nDraws; j++) out[j] = order[rng.nextInt(k)];
  return out;
}

/** Throws a RangeError naming the first inconsistency. */
export function validateForcingPaths(p: ForcingPaths): void {
  if (!(Number.isInteger(p.nLeads) && p.nLeads >= 1)) throw new RangeError('forcing paths: nLeads must be a positive integer');
  if (p.key.length === 0) throw new RangeError('forcing paths: at least one path is needed');
  if (p.values.length !== p.key.length * p.nLeads) throw new RangeError('forcing paths: values must hold paths × nLeads numbers');
  for (const v of p.key) if (!Number.isFinite(v)) throw new RangeError('forcing paths: keys must be finite');
  for (const v of p.values) if (!Number.isFinite(v)) throw new RangeError('forcing paths: values must be finite');
}
