import { crpsSorted } from '../scores/crps.ts';
import { createPrng } from '../prng.ts';
import { binomialLowerTail } from './binomial.ts';
import { sourceValues, type SourceName, type VerificationCase } from './case.ts';
import { pitFromSorted } from './randomised-pit.ts';
import { twoSidedDriftChecks, type TwoSidedChecks } from './two-sided-drift.ts';
import { ValueSorter } from './value-sorter.ts';
import type { ComparisonReport } from './compare-forecasts.ts';
import { parseRfc3339, rfc3339Ms } from '../rfc3339.ts';

/** Validation-period level a gauge is held to. */
export interface DriftReference {
  /** Share of observations inside the 90 % central interval (PIT coverage) in validation. */
  coverage90: number;
  /** Mean CRPS in validation (m³/s). */
  crps: number;
}

export interface DriftOptions {
  /** Forecast watched (default 'stochastic', what the gauge publishes). */
  source?: SourceName;
  /** Keep only the last n usable cases (in the order given). */
  lastCases?: number;
  /** Keep only cases whose validTime (RFC 3339) is at or after this time. */
  since?: string;
  leadRange?: { min?: number; max?: number } | null;
  /** Fewest cases for a status (default 30, common practice). */
  minCases?: number;
  /** One-sided binomial test level for low coverage (default 0.01). */
  pValue?: number;
  /** Coverage shortfall below the expected level that counts (default 0.05, common practice). */
  coverageMargin?: number;
  /** CRPS above this multiple of the validation CRPS counts (default 1.5, common practice). */
  crpsFactor?: number;
  /** Seed of the PIT randomisation (default 1). */
  seed?: number;
  /**
   * Units of the coverage test (default 'cases'). The lead times of one run share its errors, so
   * they are far from independent and a test over cases is optimistic; 'issues' tests the
   * observed coverage share on n = the number of distinct issue times (cases need issueTime),
   * k = round(share · n): each run counts once, a conservative design-effect correction.
   */
  testUnits?: 'cases' | 'issues';
  /** Mean-PIT distance from 1/2 that counts as bias (default 0.1, common practice). */
  biasMargin?: number;
}

export interface DriftStatus {
  status: 'ok' | 'drifting' | 'insufficient-data';
  reasons: string[];
  evidence: {
    source: SourceName;
    cases: number;
    coverage90: number | null;
    /** min(0.9, validation coverage): a gauge already below nominal is held to its own level. */
    expectedCoverage90: number;
    /** P(covered ≤ observed count) under the expected coverage (one-sided binomial). */
    coveragePValue: number | null;
    /** Independent units the binomial test counted: cases, or distinct issue times (testUnits). */
    testedUnits: number;
    crps: number | null;
    referenceCrps: number;
    crpsRatio: number | null;
    firstValidTime: string | null;
    lastValidTime: string | null;
    /** The checks the other way: bias (mean PIT) and over-dispersion (coverage well above expected). */
    twoSided: TwoSidedChecks;
  };
}

/** Reference levels from a validation-period comparison. */
export function driftReferenceFrom(report: ComparisonReport, source: SourceName = 'stochastic'): DriftReference {
  const r = report[source];
  if (!r || r.spread.coverage90 === null || r.crps.crps === null) throw new RangeError(`the report has no scores for ${source}`);
  return { coverage90: r.spread.coverage90, crps: r.crps.crps };
}

/**
 * Drift watch over a rolling window of recently verified forecasts.
 * Coverage: k of n observations have PIT in [0.05, 0.95]; drifting when the one-sided
 * binomial P(X ≤ k | n, p0) < pValue AND k/n < p0 − coverageMargin, with p0 =
 * min(0.9, validation coverage) — statistically and practically below. Cases of one issue are
 * not independent, so the p-value is optimistic; the margin guards against that.
 * CRPS: drifting when mean CRPS > crpsFactor × validation CRPS. CRPS grows with flow, so a
 * window in a wet season can exceed a whole-year reference without drift; pick the factor,
 * or a seasonal reference, with that in mind.
 * Two-sided (twoSidedDriftChecks): also drifting when the mean PIT is clearly away from 1/2
 * (bias) or the 90 % coverage is clearly above max(0.9, validation coverage) (over-dispersion),
 * tested over the same units.
 */
export function watchDrift(cases: Iterable<VerificationCase>, reference: DriftReference, options: DriftOptions = {}): DriftStatus {
  const source = options.source ?? 'stochastic';
  const minCases = options.minCases ?? 30;
  const alpha = options.pValue ?? 0.01;
  const margin = options.coverageMargin ?? 0.05;
  const factor = options.crpsFactor ?? 1.5;
  if (!(reference.coverage90 >= 0 && reference.coverage90 <= 1) || !(reference.crps > 0)) {
    throw new RangeError('reference needs coverage90 in [0, 1] and crps > 0');
  }
  const since = options.since !== undefined ? (parseRfc3339(options.since) ?? NaN) : null;
  if (since !== null && Number.isNaN(since)) throw new RangeError(`since is not an RFC 3339 time: ${options.since}`);
  const minLead = options.leadRange?.min ?? -Infinity;
  const maxLead = options.leadRange?.max ?? Infinity;

  const kept: VerificationCase[] = [];
  for (const c of cases) {
    if (c.observation === null || !Number.isFinite(c.observation) || !(c.lead >= minLead && c.lead <= maxLead)) continue;
    if (since !== null && !(c.validTime !== undefined && rfc3339Ms(c.validTime) >= since)) continue;
    if (!sourceValues(c, source)) continue;
    kept.push(c);
  }
  const window = options.lastCases !== undefined ? kept.slice(Math.max(0, kept.length - options.lastCases)) : kept;

  const rng = createPrng(options.seed ?? 1);
  let row = new Float64Array(64);
  const sorter = new ValueSorter();
  let n = 0;
  let covered = 0;
  const issues = new Set<string | undefined>();
  let crpsSum = 0;
  const pits: number[] = [];
  for (const c of window) {
    const v = sourceValues(c, source)!;
    if (row.length < v.length) row = new Float64Array(v.length);
    let m = 0;
    let min = Infinity;
    for (let i = 0; i < v.length; i++) {
      const x = v[i];
      if (x !== null && Number.isFinite(x)) {
        row[m++] = x + 0;
        if (x < min) min = x;
      }
    }
    if (m === 0) continue;
    const sorted = sorter.sort(row, m, min >= 0);
    const y = c.observation as number;
    const pit = pitFromSorted(sorted, m, y, rng.nextFloat());
    n++;
    pits.push(pit);
    issues.add(c.issueTime);
    if (pit >= 0.05 && pit <= 0.95) covered++;
    crpsSum += crpsSorted(sorted, y);
  }
  const p0 = Math.min(0.9, reference.coverage90);
  if (options.testUnits === 'issues' && issues.has(undefined)) throw new RangeError("testUnits 'issues' needs issueTime on every case");
  const units = options.testUnits === 'issues' ? issues.size : n;
  const unitsCovered = options.testUnits === 'issues' ? Math.round((covered / Math.max(1, n)) * units) : covered;
  const evidence: DriftStatus['evidence'] = {
    source,
    cases: n,
    coverage90: n ? covered / n : null,
    expectedCoverage90: p0,
    coveragePValue: n ? binomialLowerTail(unitsCovered, units, p0) : null,
    testedUnits: n ? units : 0,
    crps: n ? crpsSum / n : null,
    referenceCrps: reference.crps,
    crpsRatio: n ? crpsSum / n / reference.crps : null,
    firstValidTime: window[0]?.validTime ?? null,
    lastValidTime: window[window.length - 1]?.validTime ?? null,
    twoSided: twoSidedDriftChecks(pits, units, reference.coverage90, { pValue: alpha, biasMargin: options.biasMargin, coverageMargin: margin }),
  };
  const reasons: string[] = [];
  if (n < minCases) {
    reasons.push(`Only ${n} verified cases in the window; at least ${minCases} are needed.`);
    return { status: 'insufficient-data', reasons, evidence };
  }
  const cov = evidence.coverage90!;
  const pv = evidence.coveragePValue!;
  const ratio = evidence.crpsRatio!;
  const lowCoverage = pv < alpha && cov < p0 - margin;
  const highCrps = ratio > factor;
  if (lowCoverage) {
    reasons.push(`90 % coverage ${(100 * cov).toFixed(1)} % is well below the expected ${(100 * p0).toFixed(1)} % (binomial p = ${pv.toExponential(2)} < ${alpha} over ${units} ${options.testUnits === 'issues' ? 'issues' : 'cases'}, shortfall over ${margin}).`);
  }
  if (highCrps) reasons.push(`CRPS ${evidence.crps!.toPrecision(4)} is ${ratio.toFixed(2)} × the validation level (limit ${factor} ×).`);
  const two = evidence.twoSided;
  if (two.bias) {
    reasons.push(
      `Mean PIT ${two.pitMean!.toFixed(3)} is far from 0.5 (p = ${two.biasPValue!.toExponential(2)}): observations fall ${two.bias === 'high' ? 'above' : 'below'} the forecasts more often than they should (bias).`,
    );
  }
  if (two.overDispersed) {
    reasons.push(
      `90 % coverage ${(100 * cov).toFixed(1)} % is well above the expected at most ${(100 * two.expectedCoverageAtMost).toFixed(1)} % (binomial p = ${two.overDispersionPValue!.toExponential(2)}): the bands are too wide (over-dispersion).`,
    );
  }
  const drifting = lowCoverage || highCrps || two.bias !== null || two.overDispersed;
  if (!drifting) {
    reasons.push(`90 % coverage ${(100 * cov).toFixed(1)} % (expected ${(100 * p0).toFixed(1)} %), mean PIT ${two.pitMean!.toFixed(3)} and CRPS ${ratio.toFixed(2)} × the validation level are within limits.`);
  }
  return { status: drifting ? 'drifting' : 'ok', reasons, evidence };
}
