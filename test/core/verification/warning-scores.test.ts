import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { crpsEnsemble } from '../../../src/core/scores/crps.ts';
import { createPrng } from '../../../src/core/prng.ts';
import {
  blockBootstrap,
  exceedanceBrier,
  prefixSums,
  rocAreaWeighted,
  rocPlacementSums,
  rocTable,
  probabilityBin,
  reliabilityDiagram,
  relativeValue,
  rocCurve,
  thresholdWeightedCrpsSorted,
  valueCurve,
  warningContingency,
} from '../../../src/core/verification/index.ts';

// Made by test/fixtures/warning-scores/make.py with Debian python3-sklearn 1.2.1+dfsg-1,
// python3-numpy 1.24.2, python3-scipy 1.10.1.
interface CaseSet {
  prob: number[];
  outcome: number[];
  brier: number;
  rocAuc: number;
  roc: { falseAlarmRate: number[]; hitRate: number[] };
  calibration: { bins: number; counts: number[]; observedFrequency: number[]; meanForecast: number[] };
  reliability: number;
  resolution: number;
  uncertainty: number;
}
const ref = JSON.parse(readFileSync(new URL('../../fixtures/warning-scores/reference.json', import.meta.url), 'utf8')) as {
  source: string;
  ensemble7: CaseSet;
  continuous: CaseSet;
  thresholdWeightedCrps: { members: number[]; observation: number; r: number; twCrps: number }[];
};

describe.each([
  ['7-member ensemble probabilities', ref.ensemble7],
  ['continuous probabilities', ref.continuous],
])('warning scores against sklearn 1.2.1: %s', (_, c) => {
  it('Brier score equals sklearn.metrics.brier_score_loss; Murphy (1973) reliability, resolution and uncertainty equal numpy on calibration_curve bins; the Stephenson et al. (2008) identity holds', () => {
    const b = exceedanceBrier(c.prob, c.outcome, 0.2, c.calibration.bins);
    expect(b.brier).toBeCloseTo(c.brier, 12); // sklearn.metrics.brier_score_loss
    expect(b.reliability).toBeCloseTo(c.reliability, 12); // numpy, Murphy (1973)
    expect(b.resolution).toBeCloseTo(c.resolution, 12);
    expect(b.uncertainty).toBeCloseTo(c.uncertainty, 12);
    // Stephenson, Coelho & Jolliffe (2008): BS = REL − RES + UNC + WBV − WBC, exactly, for any binning.
    expect(b.reliability - b.resolution + b.uncertainty + b.withinBinVariance - b.withinBinCovariance).toBeCloseTo(b.brier, 12);
    // Skill against a fixed climatological probability c: BS_ref = mean (c − o)² (worked by hand from the definition).
    const o = c.outcome.reduce((a, x) => a + x, 0) / c.outcome.length;
    const bsRef = o * (1 - 0.2) ** 2 + (1 - o) * 0.2 ** 2;
    expect(b.referenceBrier).toBeCloseTo(bsRef, 12);
    expect(b.skill).toBeCloseTo(1 - c.brier / bsRef, 12);
  });

  it('reliability-diagram bins equal sklearn.calibration.calibration_curve(strategy="uniform")', () => {
    const d = reliabilityDiagram(c.prob, c.outcome, { bins: c.calibration.bins, resamples: 0 });
    expect(d.map((x) => x.count)).toEqual(c.calibration.counts); // numpy.searchsorted on the same edges
    const filled = d.filter((x) => x.count > 0);
    expect(filled.map((x) => x.observedFrequency)).toEqual(c.calibration.observedFrequency.map((v) => expect.closeTo(v, 12)));
    expect(filled.map((x) => x.meanForecast)).toEqual(c.calibration.meanForecast.map((v) => expect.closeTo(v, 12)));
  });

  it('ROC points equal sklearn.metrics.roc_curve(drop_intermediate=False) and the area equals roc_auc_score (Mason 1982 trapezoid)', () => {
    const roc = rocCurve(c.prob, c.outcome);
    expect(roc.points.map((p) => p.falseAlarmRate)).toEqual(c.roc.falseAlarmRate.map((v) => expect.closeTo(v, 12)));
    expect(roc.points.map((p) => p.hitRate)).toEqual(c.roc.hitRate.map((v) => expect.closeTo(v, 12)));
    expect(roc.area).toBeCloseTo(c.rocAuc, 12);
  });

  it('relative economic value: at cost/loss = base rate each decision level is worth its Peirce skill score H − F, which is that level’s highest value, so the envelope’s maximum is the best Peirce score (Richardson 2000, QJRMS 126, section 3)', () => {
    const s = c.outcome.reduce((a, x) => a + x, 0) / c.outcome.length;
    // The (H, F) pairs are sklearn's roc_curve points; the value formula is ours.
    const pairs = c.roc.hitRate.map((h, i) => [h, c.roc.falseAlarmRate[i]]).slice(1, -1);
    const grid = Array.from({ length: 999 }, (_, i) => (i + 1) / 1000).concat([s]);
    let bestPeirce = -Infinity;
    for (const [h, f] of pairs) {
      expect(relativeValue(h, f, s, s)).toBeCloseTo(h - f, 12);
      let top = -Infinity;
      for (const a of grid) top = Math.max(top, relativeValue(h, f, s, a));
      expect(top).toBeCloseTo(h - f, 12);
      bestPeirce = Math.max(bestPeirce, h - f);
    }
    const curve = valueCurve(c.prob, c.outcome, grid);
    expect(curve.baseRate).toBeCloseTo(s, 14);
    expect(Math.max(...curve.points.map((p) => p.value))).toBeCloseTo(bestPeirce, 12);
    // A perfect warning is worth 1 at every cost/loss ratio; climatology (H = F = 0) 0 (from the definition).
    expect(relativeValue(1, 0, s, 0.3)).toBeCloseTo(1, 14);
    expect(relativeValue(0, 0, s, 0.9)).toBeCloseTo(0, 14);
  });
});

describe('attention-flag contingency', () => {
  it('hit rate, false-alarm ratio and critical success index from a table counted by hand (definitions: Jolliffe & Stephenson 2012, ch. 3, from memory)', () => {
    // level 0.3: warned = p ≥ 0.3.  a = 2 (0.9/1, 0.3/1), b = 1 (0.5/0), c = 1 (0.1/1), d = 2.
    const w = warningContingency([0.9, 0.3, 0.5, 0.1, 0.2, 0.0, NaN], [1, 1, 0, 1, 0, 0, 1], 0.3);
    expect([w.hits, w.falseAlarms, w.misses, w.correctRejections]).toEqual([2, 1, 1, 2]);
    expect(w.hitRate).toBeCloseTo(2 / 3, 15);
    expect(w.falseAlarmRatio).toBeCloseTo(1 / 3, 15);
    expect(w.criticalSuccessIndex).toBeCloseTo(2 / 4, 15);
    expect(w.falseAlarmRate).toBeCloseTo(1 / 3, 15);
    expect(w.peirceSkill).toBeCloseTo(1 / 3, 15);
    expect(w.frequencyBias).toBeCloseTo(1, 15);
  });
});

describe('threshold-weighted CRPS', () => {
  it('equals scipy.integrate.quad of (F(z) − 1{y ≤ z})² over z ≥ r (Gneiting & Ranjan 2011, weight 1{z ≥ r}; scipy 1.10.1)', () => {
    for (const c of ref.thresholdWeightedCrps) {
      const sorted = Float64Array.from(c.members).sort();
      expect(thresholdWeightedCrpsSorted(sorted, c.observation, c.r)).toBeCloseTo(c.twCrps, 9);
    }
  });

  it('with r below every value it is the plain CRPS', () => {
    const m = [3, 7, 1, 12];
    expect(thresholdWeightedCrpsSorted(Float64Array.from(m).sort(), 5, -1)).toBeCloseTo(crpsEnsemble(m, 5), 14);
  });
});

describe('probability bins', () => {
  it('are closed on the right, as numpy.searchsorted on the inner edges (what calibration_curve uses)', () => {
    expect([0, 0.1, 0.1000001, 0.7, 0.70001, 1].map((p) => probabilityBin(p, 10))).toEqual([0, 0, 1, 6, 7, 9]);
  });
});

describe('consistency bars (Bröcker & Smith 2007)', () => {
  it('the normal limit used for large bins agrees with case-by-case resampling', () => {
    const g = createPrng(4);
    const p = Array.from({ length: 3000 }, () => g.nextFloat());
    const o = p.map((x) => (g.nextFloat() < x ? 1 : 0));
    const exact = reliabilityDiagram(p, o, { resamples: 2000, exactUpTo: 10_000, seed: 2 });
    const approx = reliabilityDiagram(p, o, { resamples: 2000, exactUpTo: 0 });
    exact.forEach((b, k) => {
      const width = b.consistencyHigh - b.consistencyLow;
      expect(Math.abs(approx[k].consistencyHigh - approx[k].consistencyLow - width)).toBeLessThan(0.1 * width);
      expect(Math.abs(approx[k].consistencyLow - b.consistencyLow)).toBeLessThan(0.1 * width);
    });
  });
});

describe('ROC area intervals', () => {
  it('the linearised replicate area (DeLong et al. 1988 placements) follows the exact reweighted area closely', () => {
    const g = createPrng(8);
    const nRuns = 400;
    const H = 5;
    const prob: number[] = [];
    const outcome: number[] = [];
    const group: number[] = [];
    for (let r = 0; r < nRuns; r++) {
      for (let k = 0; k < H; k++) {
        const x = g.normal();
        prob.push(Math.round(100 / (1 + Math.exp(-1.5 * x))) / 100);
        outcome.push(g.nextFloat() < 1 / (1 + Math.exp(-(x - 0.8))) ? 1 : 0);
        group.push(r);
      }
    }
    const t = rocTable(prob, outcome, group);
    const place = rocPlacementSums(t, nRuns);
    expect(place.area).toBeCloseTo(rocCurve(prob, outcome).area, 14);
    const [a, b, c, d] = [place.v10, place.events, place.v01, place.nonEvents].map(prefixSums);
    const scratch = { ev: new Float64Array(t.levels.length), non: new Float64Array(t.levels.length) };
    const [exact, linear] = blockBootstrap(
      nRuns,
      [(rep) => rocAreaWeighted(t, rep.weights(), scratch), (rep) => rep.sum(a) / rep.sum(b) + rep.sum(c) / rep.sum(d) - place.area],
      { blockLength: H, replicates: 400, seed: 3 },
    );
    expect(Math.abs(linear.low - exact.low)).toBeLessThan(0.005);
    expect(Math.abs(linear.high - exact.high)).toBeLessThan(0.005);
    expect(exact.high - exact.low).toBeGreaterThan(0.02);
  });
});
