import { describe, expect, it } from 'vitest';
import { buildArchiveFromSeries } from '../../src/core/stochastic/error-archive.ts';
import { chooseNeighbourSettings, chooseNeighboursByHalves, scoreNeighbourSettings } from '../../src/core/stochastic/neighbour-choice.ts';
import { createPrng } from '../../src/core/prng.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';

/** Cases x ~ U(10, 100) with errors N(0, (0.5 + 0.02x)²): error spread grows with flow (invented process). */
function cases(seed: number, n: number) {
  const g = createPrng(seed);
  const predictor = Float64Array.from({ length: n }, () => 10 + 90 * g.nextFloat());
  const error = Float64Array.from(predictor, (x) => (0.5 + 0.02 * x) * g.normal());
  return { predictor, error };
}

function sortedCases(c: { predictor: Float64Array; error: Float64Array }) {
  const order = Array.from(c.predictor, (_, i) => i).sort((a, b) => c.predictor[a] - c.predictor[b]);
  return { predictor: Float64Array.from(order, (i) => c.predictor[i]), error: Float64Array.from(order, (i) => c.error[i]) };
}

describe('choosing the neighbour kernel and k on held-out errors', () => {
  const train = sortedCases(cases(1, 6000));
  const heldOut = cases(2, 4000);
  const scores = scoreNeighbourSettings(train, heldOut);

  it('the Lall & Sharma kernel at k = √n is too narrow; a wider kernel covers the nominal 90 %', () => {
    const ls = scores.find((s) => s.kernel === 'lall-sharma' && s.kScale === 1)!;
    expect(ls.k).toBe(77); // round(√6000)
    // The 1/j kernel has ~15 effective neighbours: its central 90 % interval covers clearly less.
    expect(ls.coverage90).toBeLessThan(0.87);
    const chosen = chooseNeighbourSettings(scores);
    const c = scores.find((s) => s.kernel === chosen.kernel && s.kScale === chosen.kScale)!;
    // Binomial SE of a coverage from 4000 cases ≈ 0.005; bounds 0.87–0.93.
    expect(c.coverage90).toBeGreaterThan(0.87);
    expect(c.coverage90).toBeLessThan(0.93);
    expect(c.alpha).toBeGreaterThan(0.95);
    expect(c.alpha).toBeGreaterThan(ls.alpha);
  });

  it('a neighbourhood so wide that it forgets the flow dependence loses on CRPS', () => {
    // All 6000 cases as neighbours (uniform, k = n) is the unconditional error distribution: the
    // PIT can still be near uniform overall, but the CRPS is worse than a local choice.
    const few = { predictor: heldOut.predictor.subarray(0, 500), error: heldOut.error.subarray(0, 500) };
    const chosen = chooseNeighbourSettings(scores);
    const [wide, local] = scoreNeighbourSettings(train, few, [{ kernel: 'uniform', kScale: 6000 / 77 }, chosen]);
    expect(wide.k).toBe(6000);
    expect(local.crps).toBeLessThan(wide.crps);
  });

  it('the stage with the chosen settings gives bands that cover 88–92 % of new cases', () => {
    const n = 6000;
    const g = createPrng(3);
    const corrected = Float64Array.from({ length: n }, () => 10 + 90 * g.nextFloat());
    const observed = Float64Array.from(corrected, (x) => x + (0.5 + 0.02 * x) * g.normal());
    const segment = n / 2; // two "members"
    const choice = chooseNeighboursByHalves({ corrected, observed, segmentLength: segment, transform: { kind: 'none' } });
    const archive = buildArchiveFromSeries({ corrected, observed, dayOfYear: Array.from({ length: n }, () => 1), templateLength: 1, segmentLength: segment });
    archive.neighbours = choice.settings;
    const nNew = 2000;
    const x = Float64Array.from({ length: nNew }, () => 15 + 80 * g.nextFloat());
    const y = Float64Array.from(x, (v) => v + (0.5 + 0.02 * v) * g.normal());
    const r = runStochasticStage(archive, { members: x, nMembers: 1, nLeads: nNew }, { seed: 4, nDraws: 1000, probs: [0.05, 0.95], shuffle: false });
    let covered = 0;
    for (let i = 0; i < nNew; i++) if (y[i] >= r.quantiles[2 * i] && y[i] <= r.quantiles[2 * i + 1]) covered++;
    // Binomial SE with 2000 cases ≈ 0.0067: 88–92 % is ±3 SE around nominal.
    expect(covered / nNew).toBeGreaterThan(0.88);
    expect(covered / nNew).toBeLessThan(0.92);
    expect(r.kernel).toBe(choice.settings.kernel);
  });
});
