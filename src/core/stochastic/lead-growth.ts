import { forwardTransform, type ErrorTransform } from './error-transform.ts';

/**
 * How much the errors of a lead-free archive must grow with lead time.
 *
 * A lead-free archive holds the errors of continuous simulations driven by observed forcings. A
 * real forecast at lead h also carries the error of its forecast forcings, which grows with lead
 * and is shared by all members (they are driven by the same forecast). Past runs measure it: the
 * variance of their ensemble mean's error at lead h, F_h, against the variance of the continuous
 * simulations' ensemble-mean error over the same period, V̄. Treating the forcing part as an
 * independent addition, each member's error variance V_m grows by τ_h² = max(0, F_h − V̄), so the
 * archive's errors are scaled by
 *   g_h = √(1 + τ_h² / V_m)   (derived by hand; all variances in the archive's transform space).
 * g_h ≥ 1: the scale only widens; a lead whose past runs err less than the simulations keeps 1.
 */
export interface LeadGrowthInput {
  /** Variance of the archive's member errors (continuous simulations). */
  memberErrorVariance: number;
  /** Variance of the continuous simulations' ensemble-mean error over the same period. */
  meanErrorVariance: number;
  /** Per lead: variance of the past runs' ensemble-mean error. */
  forecastMeanErrorVariance: ArrayLike<number>;
}

export function leadGrowthScale(input: LeadGrowthInput): Float64Array {
  const { memberErrorVariance: vm, meanErrorVariance: vbar, forecastMeanErrorVariance: f } = input;
  if (!(vm > 0) || !Number.isFinite(vm)) throw new RangeError('memberErrorVariance must be positive and finite');
  if (!(vbar >= 0) || !Number.isFinite(vbar)) throw new RangeError('meanErrorVariance must be ≥ 0 and finite');
  return Float64Array.from(f, (fh, h) => {
    if (!(fh >= 0) || !Number.isFinite(fh)) throw new RangeError(`forecastMeanErrorVariance[${h}] must be ≥ 0 and finite`);
    return Math.sqrt(1 + Math.max(0, fh - vbar) / vm);
  });
}

/**
 * The two variances of continuous simulations that leadGrowthScale compares against: of the member
 * errors, and of the ensemble mean's error (mean taken in the transform space), from members'
 * series laid end to end in segments of equal length (the same time steps in each segment).
 */
export function simulationErrorVariances(input: {
  corrected: ArrayLike<number>;
  observed: ArrayLike<number>;
  nMembers: number;
  segmentLength: number;
  transform: ErrorTransform;
}): { memberErrorVariance: number; meanErrorVariance: number } {
  const { corrected, observed, nMembers, segmentLength: L, transform } = input;
  const member = { n: 0, s: 0, s2: 0 };
  const mean = { n: 0, s: 0, s2: 0 };
  const add = (acc: { n: number; s: number; s2: number }, e: number) => {
    acc.n++;
    acc.s += e;
    acc.s2 += e * e;
  };
  for (let j = 0; j < L; j++) {
    let sum = 0;
    let m = 0;
    let y = NaN;
    for (let k = 0; k < nMembers; k++) {
      const c = corrected[k * L + j];
      const o = observed[k * L + j];
      if (!Number.isFinite(c)) continue;
      const z = forwardTransform(transform, c);
      sum += z;
      m++;
      if (Number.isFinite(o)) {
        y = forwardTransform(transform, o);
        add(member, y - z);
      }
    }
    if (m > 0 && Number.isFinite(y)) add(mean, y - sum / m);
  }
  const variance = (a: { n: number; s: number; s2: number }) => (a.n > 1 ? (a.s2 - (a.s * a.s) / a.n) / (a.n - 1) : NaN);
  return { memberErrorVariance: variance(member), meanErrorVariance: variance(mean) };
}
