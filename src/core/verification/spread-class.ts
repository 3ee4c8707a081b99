import { pitCoverage } from './randomised-pit.ts';

/**
 * Words of ensemble verification for the spread of a forecast against what it should be:
 * under-dispersive (too narrow), calibrated, over-dispersive (too wide).
 */
export const SPREAD_CLASSES = ['under-dispersive', 'calibrated', 'over-dispersive'] as const;
export type SpreadClass = (typeof SPREAD_CLASSES)[number];

export interface SpreadAssessment {
  class: SpreadClass | null;
  /** Cases used. */
  n: number;
  /** Share of PIT values in [0.05, 0.95]: the 90 % central interval read from the forecast CDF. */
  coverage90: number | null;
  /** Allowed distance from 0.9 before a class other than calibrated is given. */
  tolerance: number | null;
  /** Mean PIT (0.5 for an unbiased forecast; below = forecasts too high, above = too low). */
  pitMean: number | null;
  rule: string;
}

export interface SpreadOptions {
  /** Smallest tolerance (default 0.03, common practice). */
  margin?: number;
  /** Binomial standard errors allowed (default 2). */
  z?: number;
}

/**
 * Spread class from PIT values. Rule: c90 = share of PIT values in [0.05, 0.95]; tolerance =
 * max(margin, z·√(0.9·0.1/n)) (the binomial standard error of c90 for independent cases, never
 * below the margin because consecutive lead times are not independent). c90 < 0.9 − tolerance →
 * under-dispersive (observations fall in the tails too often; a bias has the same effect, see pitMean);
 * c90 > 0.9 + tolerance → over-dispersive; otherwise calibrated. PIT coverage is used, not
 * the band between member quantiles, because the band of a small calibrated ensemble covers
 * less than nominal (its ends are interpolated between members). Margin and z: common practice.
 */
export function classifySpread(pit: ArrayLike<number>, options: SpreadOptions = {}): SpreadAssessment {
  const margin = options.margin ?? 0.03;
  const z = options.z ?? 2;
  const rule = `coverage90 = share of PIT in [0.05, 0.95]; tolerance = max(${margin}, ${z}·sqrt(0.09/n)); below 0.9 − tolerance: under-dispersive; above 0.9 + tolerance: over-dispersive; else calibrated`;
  const { n, coverage } = pitCoverage(pit, 0.9);
  if (n === 0) return { class: null, n, coverage90: null, tolerance: null, pitMean: null, rule };
  let s = 0;
  for (let i = 0; i < pit.length; i++) if (!Number.isNaN(pit[i])) s += pit[i];
  const tolerance = Math.max(margin, z * Math.sqrt(0.09 / n));
  const cls: SpreadClass = coverage < 0.9 - tolerance ? 'under-dispersive' : coverage > 0.9 + tolerance ? 'over-dispersive' : 'calibrated';
  return { class: cls, n, coverage90: coverage, tolerance, pitMean: s / n, rule };
}
