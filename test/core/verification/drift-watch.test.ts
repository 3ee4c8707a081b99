import { describe, expect, it } from 'vitest';
import { compareForecasts, createPrng, driftReferenceFrom, watchDrift, type VerificationCase } from '../../../src/core/index.ts';
import { synthetic } from './synthetic.ts';

const DAY = 86_400_000;
const T0 = Date.UTC(2021, 0, 1);

/** Cases whose stochastic samples come from the observation's own distribution, shifted by `shift`·σ. */
function sampled(nIssues: number, seed: number, shift: number, firstDay: number): VerificationCase[] {
  const H = 3;
  const run = synthetic({ nIssues, nLeads: H, nMembers: 5, seed, spread: 1, firstDay });
  const g = createPrng(seed + 1000);
  const out: VerificationCase[] = [];
  for (let i = 0; i < nIssues; i++) {
    for (let h = 0; h < H; h++) {
      const k = i * H + h;
      const raw = Float64Array.from({ length: 5 }, (_, m) => run.raw[(i * 5 + m) * H + h]);
      const mu = run.centre[k] + shift * run.sd[k];
      const stochastic = Float64Array.from({ length: 200 }, () => g.normal(mu, run.sd[k]));
      out.push({ lead: h, observation: run.observed[k], raw, corrected: raw, stochastic, validTime: new Date(T0 + (firstDay + i + h) * DAY).toISOString() });
    }
  }
  return out;
}

describe('drift watch', () => {
  const validation = compareForecasts(sampled(400, 1, 0, 0));
  const reference = driftReferenceFrom(validation);

  it('takes its reference from a validation comparison', () => {
    expect(reference.coverage90).toBe(validation.stochastic!.spread.coverage90);
    expect(reference.crps).toBe(validation.stochastic!.crps.crps);
    expect(Math.abs(reference.coverage90 - 0.9)).toBeLessThan(0.03);
  });

  it('stays ok while the forecasts behave as in validation', () => {
    const d = watchDrift(sampled(60, 2, 0, 400), reference);
    expect(d.status).toBe('ok');
    expect(d.evidence.cases).toBe(180);
    expect(d.evidence.crpsRatio!).toBeLessThan(1.3);
    expect(d.evidence.coveragePValue!).toBeGreaterThan(0.01);
  });

  it('detects a change of bias (forecasts 1.5 σ too high): low 90 % coverage, worse CRPS and a low mean PIT', () => {
    const recent = [...sampled(150, 3, 0, 400), ...sampled(30, 4, 1.5, 560)];
    // Whole history: the 90 biased cases are diluted. Last 90 cases, or since the change: drifting.
    const last = watchDrift(recent, reference, { lastCases: 90 });
    expect(last.status).toBe('drifting');
    expect(last.evidence.cases).toBe(90);
    // With a 1.5 σ shift, P(|ε − 1.5| ≤ 1.645) = Φ(3.145) − Φ(−0.145) = 0.5568 (scipy.stats.norm.cdf,
    // Debian python3-scipy 1.10.1, test/fixtures/normal-table/print_values.py): well below 0.75.
    expect(last.evidence.coverage90!).toBeLessThan(0.75);
    expect(last.evidence.coveragePValue!).toBeLessThan(1e-6);
    expect(last.evidence.crpsRatio!).toBeGreaterThan(1.5);
    // The two-sided check sees the direction: observations below the forecasts, mean PIT well under 1/2.
    expect(last.evidence.twoSided.bias).toBe('low');
    expect(last.evidence.twoSided.pitMean!).toBeLessThan(0.4);
    expect(last.evidence.twoSided.overDispersed).toBe(false);
    expect(last.reasons.length).toBe(3);
    const since = watchDrift(recent, reference, { since: new Date(T0 + 560 * DAY).toISOString() });
    expect(since.status).toBe('drifting');
    expect(since.evidence.cases).toBe(90);
    expect(since.evidence.firstValidTime).toBe(new Date(T0 + 560 * DAY).toISOString());
  });

  it('says insufficient-data for a short window, and holds a gauge to its own validation coverage when below nominal', () => {
    const short = watchDrift(sampled(5, 5, 0, 400), reference);
    expect(short.status).toBe('insufficient-data');
    expect(short.evidence.cases).toBe(15);
    const d = watchDrift(sampled(60, 2, 0, 400), { coverage90: 0.8, crps: reference.crps });
    expect(d.evidence.expectedCoverage90).toBe(0.8);
    // Only the raw ensemble watched, lead 0 only.
    const raw = watchDrift(sampled(60, 2, 0, 400), { coverage90: 0.9, crps: reference.crps }, { source: 'raw', leadRange: { max: 0 } });
    expect(raw.evidence.source).toBe('raw');
    expect(raw.evidence.cases).toBe(60);
    expect(() => watchDrift([], { coverage90: 0.9, crps: 0 })).toThrow(RangeError);
  });
});
