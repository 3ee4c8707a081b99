import type { ComparisonReport, SourceReport } from './compare-forecasts.ts';
import type { SpreadClass } from './spread-class.ts';

export type StochasticRecommendation = 'use-stochastic' | 'corrected-ensemble-suffices' | 'insufficient-data';

export interface AdviceOptions {
  /** Fewest verified cases for any advice (default 100, common practice). */
  minCases?: number;
  /** Alpha-index change counted as a real change (default 0.02, common practice). */
  alphaMargin?: number;
  /** |t| of the paired CRPS difference counted as a clear difference (default 2, common practice). */
  tCritical?: number;
  /** Rule-of-thumb alpha level (default 0.85; common practice from published results, no single source). */
  ruleOfThumbAlpha?: number;
}

export interface StochasticAdvice {
  recommendation: StochasticRecommendation;
  reasons: string[];
  evidence: {
    cases: number;
    alphaCorrected: number | null;
    alphaStochastic: number | null;
    alphaChange: number | null;
    crpsCorrected: number | null;
    crpsStochastic: number | null;
    fairCrpsCorrected: number | null;
    fairCrpsStochastic: number | null;
    /** Which CRPS the decision used: fair unless some case had fewer than 2 values. */
    crpsUsed: 'fair' | 'standard';
    /** (CRPS stochastic − CRPS corrected)/CRPS corrected of the CRPS used; negative = the stage helps. */
    crpsChangeRelative: number | null;
    /** Batch-means t of the paired difference (stochastic − corrected) of the CRPS used. */
    crpsDifferenceT: number | null;
    reliabilityCorrected: number | null;
    reliabilityStochastic: number | null;
    coverage90Corrected: number | null;
    coverage90Stochastic: number | null;
    width90Corrected: number | null;
    width90Stochastic: number | null;
    spreadCorrected: SpreadClass | null;
    spreadStochastic: SpreadClass | null;
    ruleOfThumb: {
      alphaThreshold: number;
      suggests: Exclude<StochasticRecommendation, 'insufficient-data'> | null;
      agreesWithRecommendation: boolean | null;
    };
  };
}

const f3 = (x: number | null): string => (x === null ? 'n/a' : x.toFixed(3));

function width90(r: SourceReport | null): number | null {
  return r?.intervals.find((i) => Math.abs(i.level - 0.9) < 1e-12)?.meanWidth ?? null;
}

/**
 * Whether to use the stochastic stage on this gauge, from the gauge's own comparison first.
 *
 * Evidence: alpha index (reliability) and CRPS of the corrected ensemble against the stochastic
 * stage on the same cases. CRPS here is the fair CRPS (Ferro 2014), so the stage gains nothing
 * from drawing more values than there are members (the standard CRPS would reward 1000 samples
 * over 50 members for their number alone); the standard CRPS is used only if some case had
 * fewer than two values. Reliability changes when |Δα| > alphaMargin; CRPS changes when the
 * batch-means t of the paired difference exceeds tCritical.
 *  - one improves and the other does not worsen → use-stochastic;
 *  - one worsens and neither improves, or no clear change at all → corrected-ensemble-suffices
 *    (the stage adds cost and no measurable value);
 *  - they disagree → the forecast whose spread is classed calibrated wins; if both or neither
 *    are, CRPS decides (a proper score that weighs reliability and sharpness together).
 * The rule of thumb — alpha of the corrected ensemble above about 0.85 → the stage tends not to
 * improve reliability; below, it tends to (common practice from published results, no single
 * source) — is reported beside the evidence, never instead of it.
 */
export function adviseStochasticStage(report: ComparisonReport, options: AdviceOptions = {}): StochasticAdvice {
  const minCases = options.minCases ?? 100;
  const margin = options.alphaMargin ?? 0.02;
  const tc = options.tCritical ?? 2;
  const thr = options.ruleOfThumbAlpha ?? 0.85;
  const c = report.corrected;
  const s = report.stochastic;
  const fairD = report.fairCrpsDifferences.stochasticVsCorrected;
  const useFair = fairD !== null && fairD.n === report.cases.used && report.cases.used > 0;
  const d = useFair ? fairD : report.crpsDifferences.stochasticVsCorrected;
  const aC = c.alphaIndex;
  const aS = s?.alphaIndex ?? null;
  const crC = useFair ? c.crps.fairCrps : c.crps.crps;
  const crS = (useFair ? s?.crps.fairCrps : s?.crps.crps) ?? null;
  const evidence: StochasticAdvice['evidence'] = {
    cases: report.cases.used,
    alphaCorrected: aC,
    alphaStochastic: aS,
    alphaChange: aC !== null && aS !== null ? aS - aC : null,
    crpsCorrected: c.crps.crps,
    crpsStochastic: s?.crps.crps ?? null,
    fairCrpsCorrected: c.crps.fairCrps,
    fairCrpsStochastic: s?.crps.fairCrps ?? null,
    crpsUsed: useFair ? 'fair' : 'standard',
    crpsChangeRelative: d?.relativeDifference ?? null,
    crpsDifferenceT: d?.t ?? null,
    reliabilityCorrected: c.crps.hersbach.reliability,
    reliabilityStochastic: s?.crps.hersbach.reliability ?? null,
    coverage90Corrected: c.spread.coverage90,
    coverage90Stochastic: s?.spread.coverage90 ?? null,
    width90Corrected: width90(c),
    width90Stochastic: width90(s),
    spreadCorrected: c.spread.class,
    spreadStochastic: s?.spread.class ?? null,
    ruleOfThumb: {
      alphaThreshold: thr,
      suggests: aC === null ? null : aC >= thr ? 'corrected-ensemble-suffices' : 'use-stochastic',
      agreesWithRecommendation: null,
    },
  };
  const reasons: string[] = [];
  const done = (recommendation: StochasticRecommendation): StochasticAdvice => {
    const rt = evidence.ruleOfThumb;
    if (recommendation !== 'insufficient-data' && rt.suggests !== null) {
      rt.agreesWithRecommendation = rt.suggests === recommendation;
      reasons.push(
        `Rule of thumb (common practice from published results, no single source): corrected alpha ${f3(aC)} is ${aC! >= thr ? 'above' : 'below'} ${thr}, which suggests ${rt.suggests}; the gauge's own evidence ${rt.agreesWithRecommendation ? 'agrees' : 'disagrees, and the evidence decides'}.`,
      );
    }
    return { recommendation, reasons, evidence };
  };

  if (!s || s.n === 0) {
    reasons.push('The stochastic stage was not verified on these cases.');
    return done('insufficient-data');
  }
  if (report.cases.used < minCases) {
    reasons.push(`Only ${report.cases.used} verified cases; at least ${minCases} are needed.`);
    return done('insufficient-data');
  }
  if (aC === null || aS === null || crC === null || crS === null) {
    reasons.push('Alpha index or CRPS could not be computed.');
    return done('insufficient-data');
  }
  const dA = aS - aC;
  const relBetter = dA > margin;
  const relWorse = dA < -margin;
  const t = d?.t ?? null;
  const crpsBetter = t !== null && t < -tc;
  const crpsWorse = t !== null && t > tc;
  reasons.push(
    `Reliability: alpha ${f3(aC)} (corrected) → ${f3(aS)} (stochastic), ${relBetter ? 'improved' : relWorse ? 'worse' : 'no clear change'} (margin ${margin}).`,
  );
  reasons.push(
    `${useFair ? 'Fair CRPS' : 'CRPS'}: ${f3(crC)} → ${f3(crS)} (${d?.relativeDifference != null ? (100 * d.relativeDifference).toFixed(1) + ' %' : 'n/a'}, batch-means t = ${t === null ? 'n/a' : t.toFixed(1)}), ${crpsBetter ? 'improved' : crpsWorse ? 'worse' : 'no clear change'}.`,
  );
  reasons.push(
    `Spread: corrected ${c.spread.class ?? 'n/a'} (90 % PIT coverage ${f3(c.spread.coverage90)}), stochastic ${s.spread.class ?? 'n/a'} (${f3(s.spread.coverage90)}).`,
  );
  if (t === null) reasons.push('Too few cases to judge the CRPS difference; the decision rests on reliability.');

  if ((relBetter && !crpsWorse) || (crpsBetter && !relWorse)) {
    reasons.push('The stochastic stage improves on the corrected ensemble without making the other measure worse.');
    return done('use-stochastic');
  }
  if ((relBetter && crpsWorse) || (crpsBetter && relWorse)) {
    const cOk = c.spread.class === 'calibrated';
    const sOk = s.spread.class === 'calibrated';
    if (cOk !== sOk) {
      reasons.push(`Reliability and CRPS disagree; only the ${sOk ? 'stochastic stage' : 'corrected ensemble'} has a calibrated spread, so it is preferred.`);
      return done(sOk ? 'use-stochastic' : 'corrected-ensemble-suffices');
    }
    reasons.push('Reliability and CRPS disagree and the spread classes do not separate them; CRPS (a proper score) decides.');
    return done(crpsBetter ? 'use-stochastic' : 'corrected-ensemble-suffices');
  }
  if (relWorse || crpsWorse) reasons.push('The stochastic stage makes the forecast worse here.');
  else reasons.push('The stochastic stage brings no measurable improvement here.');
  if (aC < thr) reasons.push(`Note: the corrected ensemble itself is not reliable (alpha ${f3(aC)}); the residual model or the archive may need attention.`);
  return done('corrected-ensemble-suffices');
}
