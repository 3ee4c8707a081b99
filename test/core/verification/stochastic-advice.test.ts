import { describe, expect, it } from 'vitest';
import { adviseStochasticStage, compareForecasts, hindcastCases, type ComparisonReport } from '../../../src/core/index.ts';
import { archiveFrom, subtractBias, synthetic } from './synthetic.ts';

const H = 3;
const M = 20;
const BIAS = 5;

/**
 * Hindcast of the real stochastic stage (src/core/stochastic/stochastic-stage.ts) on a synthetic gauge:
 * the archive comes from a separate validation run of the same process (same spread), the
 * hindcast period follows it.
 */
function hindcastReport(spread: number, nIssues = 500): ComparisonReport {
  const validation = synthetic({ nIssues: 1500, nLeads: H, nMembers: M, seed: 1, spread, bias: BIAS });
  const archive = archiveFrom(validation, 1500, H, M, BIAS);
  const run = synthetic({ nIssues, nLeads: H, nMembers: M, seed: 2, spread, bias: BIAS, firstDay: 2000 });
  const cases = hindcastCases({
    nIssues,
    nMembers: M,
    nLeads: H,
    raw: run.raw,
    observed: run.observed,
    dayOfYear: run.dayOfYear,
    correct: subtractBias(BIAS),
    archive,
    stochastic: { seed: 7, nDraws: 200 },
  });
  return compareForecasts(cases, { thresholds: [120] });
}

describe('stochastic stage verification and advice', () => {
  it('an under-dispersive corrected ensemble is shown unreliable and the real stochastic stage improves it', () => {
    const r = hindcastReport(0.3);
    const c = r.corrected;
    const s = r.stochastic!;
    expect(c.spread.class).toBe('under-dispersive');
    // Alpha is 1 for a calibrated forecast (Renard et al. 2010); 0.8 and 0.95: common practice.
    expect(c.alphaIndex!).toBeLessThan(0.8);
    expect(s.spread.class).toBe('calibrated');
    expect(s.alphaIndex!).toBeGreaterThan(0.95);
    expect(s.crps.fairCrps!).toBeLessThan(c.crps.fairCrps!);
    expect(s.crps.hersbach.reliability!).toBeLessThan(c.crps.hersbach.reliability! / 10);
    expect(s.intervals[1].meanWidth!).toBeGreaterThan(c.intervals[1].meanWidth!);
    const a = adviseStochasticStage(r);
    expect(a.recommendation).toBe('use-stochastic');
    expect(a.evidence.crpsUsed).toBe('fair');
    expect(a.evidence.alphaChange!).toBeGreaterThan(0.1);
    expect(a.evidence.crpsDifferenceT!).toBeLessThan(-2);
    expect(a.evidence.ruleOfThumb).toEqual({ alphaThreshold: 0.85, suggests: 'use-stochastic', agreesWithRecommendation: true });
    expect(a.reasons.join(' ')).toMatch(/common practice/);
    // The correction itself helps too: bias removed.
    expect(r.crpsDifferences.correctedVsRaw.t!).toBeLessThan(-2);
  });

  it('a calibrated corrected ensemble: the stage only widens the bands, so the corrected ensemble suffices', () => {
    const r = hindcastReport(1);
    expect(r.corrected.spread.class).toBe('calibrated');
    expect(r.stochastic!.spread.class).toBe('over-dispersive');
    const a = adviseStochasticStage(r);
    expect(a.recommendation).toBe('corrected-ensemble-suffices');
    expect(a.evidence.alphaChange!).toBeLessThan(0);
    expect(a.evidence.ruleOfThumb.agreesWithRecommendation).toBe(true);
  });

  it('an over-dispersive corrected ensemble is flagged as such; the evidence overrules the rule of thumb', () => {
    const r = hindcastReport(2.5);
    expect(r.corrected.spread.class).toBe('over-dispersive');
    expect(r.corrected.alphaIndex!).toBeLessThan(0.85);
    const a = adviseStochasticStage(r);
    // The rule of thumb (alpha < 0.85 → stage tends to help) would say use it; the stage makes
    // the fair CRPS worse here, so the advice follows the gauge's own numbers.
    expect(a.evidence.ruleOfThumb.suggests).toBe('use-stochastic');
    expect(a.recommendation).toBe('corrected-ensemble-suffices');
    expect(a.evidence.ruleOfThumb.agreesWithRecommendation).toBe(false);
    expect(a.evidence.fairCrpsStochastic!).toBeGreaterThan(a.evidence.fairCrpsCorrected!);
  });

  it('insufficient data: too few cases, or no stochastic stage verified', () => {
    const small = hindcastReport(0.3, 20);
    expect(small.cases.used).toBe(60);
    expect(adviseStochasticStage(small).recommendation).toBe('insufficient-data');
    const none = compareForecasts([{ lead: 0, observation: 1, raw: [1, 2], corrected: [1, 2] }]);
    const a = adviseStochasticStage(none);
    expect(a.recommendation).toBe('insufficient-data');
    expect(a.reasons[0]).toMatch(/not verified/);
  });
});
