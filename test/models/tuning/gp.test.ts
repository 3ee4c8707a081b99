import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { createPrng } from '../../../src/core/prng.ts';
import { fitGp } from '../../../src/models/tuning/fit-gp.ts';
import { conditionGp, predictGp } from '../../../src/models/tuning/gp.ts';
import type { GpHyper } from '../../../src/models/tuning/gp.ts';
import { matern52 } from '../../../src/models/tuning/matern52.ts';

// Reference: test/fixtures/gp-sklearn/make.py, Debian python3-sklearn 1.2.1
// (GaussianProcessRegressor, ConstantKernel * Matern(nu=2.5) [+ WhiteKernel], normalize_y=True),
// numpy 1.24.2, scipy 1.10.1.
interface FixedCase {
  d: number; x: number[]; y: number[]; xs: number[]; hyper: GpHyper; jitter: number;
  mean: number[]; variance: number[]; logMarginalLikelihood: number; kernelRow: number[];
}
interface FittedCase {
  d: number; x: number[]; y: number[]; hyper: GpHyper; logMarginalLikelihood: number; fittedKernel: string;
}
const fixture = JSON.parse(
  readFileSync(new URL('../../fixtures/gp-sklearn/gp-sklearn.json', import.meta.url), 'utf8'),
) as { fixed: FixedCase[]; fitted: FittedCase[]; versions: Record<string, string> };

function expectRelClose(actual: number, expected: number, rel: number, what: string): void {
  expect(Math.abs(actual - expected), `${what}: ${actual} vs ${expected}`).toBeLessThanOrEqual(
    rel * Math.max(1, Math.abs(expected)),
  );
}

describe('Matérn 5/2 kernel', () => {
  it('is 1 at distance 0 and decreasing', () => {
    expect(matern52(0)).toBe(1);
    expect(matern52(1)).toBeLessThan(matern52(0.5));
  });
});

describe('GP posterior with fixed hyperparameters vs sklearn 1.2.1', () => {
  it.each(fixture.fixed.map((c, i) => [i, c] as const))('case %i', (_i, c) => {
    expect(fixture.versions.sklearn).toBe('1.2.1');
    const model = conditionGp(Float64Array.from(c.x), c.d, c.y, c.hyper, c.jitter);
    expect(model.jitter).toBe(c.jitter); // factor succeeded without extra jitter
    const m = c.xs.length / c.d;
    const mean = new Float64Array(m);
    const variance = new Float64Array(m);
    predictGp(model, Float64Array.from(c.xs), m, mean, variance);
    for (let p = 0; p < m; p++) {
      // sklearn GaussianProcessRegressor.predict(return_std=True): mean and std² (latent, alpha not added)
      expectRelClose(mean[p], c.mean[p], 1e-9, `mean[${p}]`);
      expectRelClose(variance[p], c.variance[p], 1e-7, `variance[${p}]`);
    }
    // sklearn log_marginal_likelihood_value_ (of the normalised outputs)
    expectRelClose(model.logMarginalLikelihood, c.logMarginalLikelihood, 1e-9, 'log marginal likelihood');
    // kernel(xs[:1], x): σf² · Matérn 5/2 with ARD length scales
    c.kernelRow.forEach((k, i) => {
      let r2 = 0;
      for (let j = 0; j < c.d; j++) r2 += ((c.xs[j] - c.x[i * c.d + j]) / c.hyper.lengthScales[j]) ** 2;
      expectRelClose(c.hyper.signalVariance * matern52(Math.sqrt(r2)), k, 1e-12, `kernel[${i}]`);
    });
  });
});

describe('hyperparameter fit vs sklearn 1.2.1 (L-BFGS-B, 20 restarts, same bounds)', () => {
  it.each(fixture.fitted.map((c, i) => [i, c] as const))('case %i reaches the same likelihood', (_i, c) => {
    const model = fitGp(Float64Array.from(c.x), c.d, c.y, { prng: createPrng(7) });
    // Our multi-start Nelder–Mead must reach sklearn's maximum of the log marginal likelihood
    // to within 1e-6 nats (or beat it), and land on the same hyperparameters within 1 %.
    expect(model.logMarginalLikelihood).toBeGreaterThanOrEqual(c.logMarginalLikelihood - 1e-6);
    const ours = conditionGp(Float64Array.from(c.x), c.d, c.y, c.hyper);
    expectRelClose(ours.logMarginalLikelihood, c.logMarginalLikelihood, 1e-8, `LML at sklearn's ${c.fittedKernel}`);
    const rel = (a: number, b: number): number => Math.abs(a / b - 1);
    c.hyper.lengthScales.forEach((l, k) => expect(rel(model.hyper.lengthScales[k], l)).toBeLessThan(0.01));
    expect(rel(model.hyper.signalVariance, c.hyper.signalVariance)).toBeLessThan(0.01);
    expect(rel(model.hyper.noiseVariance, c.hyper.noiseVariance)).toBeLessThan(0.01);
  });
});
