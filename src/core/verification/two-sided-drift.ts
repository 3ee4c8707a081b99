import { normalCdf } from '../scores/normal.ts';
import { binomialLowerTail } from './binomial.ts';

/**
 * The drift checks that look the other way, beside low coverage and high CRPS:
 *  - bias: mean PIT away from 1/2. Under calibration PIT ~ U(0, 1) with variance 1/12, so
 *    z = (mean − 1/2)/√(1/(12·units)); flagged when the two-sided p-value is below pValue and
 *    |mean − 1/2| exceeds biasMargin. Units are independent units (issues when the lead times of
 *    one run are pooled), the same design-effect correction as the coverage test.
 *  - over-dispersion: 90 % coverage well above the expected level: one-sided binomial
 *    P(X ≥ k | units, p0) < pValue and share > p0 + coverageMargin, with p0 = max(0.9, the
 *    validation coverage) — a gauge already above nominal is held to its own level.
 */
export interface TwoSidedOptions {
  pValue?: number;
  /** Default 0.1 (common practice). */
  biasMargin?: number;
  /** Default 0.05 (common practice). */
  coverageMargin?: number;
}

export interface TwoSidedChecks {
  pitMean: number | null;
  biasPValue: number | null;
  /** 'high' = observations above the forecasts (forecast too low), 'low' the other way. */
  bias: 'high' | 'low' | null;
  expectedCoverageAtMost: number;
  overDispersionPValue: number | null;
  overDispersed: boolean;
}

/** Upper tail P(X ≥ k), X ~ Binomial(n, p), by symmetry from the lower tail. */
export function binomialUpperTail(k: number, n: number, p: number): number {
  if (k <= 0) return 1;
  if (k > n) return 0;
  return binomialLowerTail(n - k, n, 1 - p);
}

export function twoSidedDriftChecks(
  pit: ArrayLike<number>,
  units: number,
  validationCoverage90: number,
  options: TwoSidedOptions = {},
): TwoSidedChecks {
  const alpha = options.pValue ?? 0.01;
  const biasMargin = options.biasMargin ?? 0.1;
  const margin = options.coverageMargin ?? 0.05;
  let n = 0;
  let sum = 0;
  let covered = 0;
  for (let i = 0; i < pit.length; i++) {
    const u = pit[i];
    if (!Number.isFinite(u)) continue;
    n++;
    sum += u;
    if (u >= 0.05 && u <= 0.95) covered++;
  }
  const p0 = Math.max(0.9, validationCoverage90);
  if (n === 0 || units < 1) return { pitMean: null, biasPValue: null, bias: null, expectedCoverageAtMost: p0, overDispersionPValue: null, overDispersed: false };
  const mean = sum / n;
  const z = (mean - 0.5) / Math.sqrt(1 / (12 * units));
  const pBias = 2 * normalCdf(-Math.abs(z));
  const share = covered / n;
  const k = Math.round(share * units);
  const pOver = binomialUpperTail(k, units, p0);
  return {
    pitMean: mean,
    biasPValue: pBias,
    bias: pBias < alpha && Math.abs(mean - 0.5) > biasMargin ? (mean > 0.5 ? 'high' : 'low') : null,
    expectedCoverageAtMost: p0,
    overDispersionPValue: pOver,
    overDispersed: pOver < alpha && share > p0 + margin,
  };
}
