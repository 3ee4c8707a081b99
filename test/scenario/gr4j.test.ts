import { describe, expect, it } from 'vitest';
import { GR4J_FLUX, GR4J_FLUX_COUNT, createGr4j, gr4jStep, initGr4jState } from '../../src/scenario/gr4j.ts';
import { checkGr4jParameters } from '../../src/scenario/gr4j-parameters.ts';
import { runGr4j } from '../../src/scenario/gr4j-run.ts';
import { createVariates } from '../../src/scenario/random-variates.ts';

// Invented forcing for the model checks (not data): gamma rain on ~45 % of days, seasonal PE.
function forcing(days: number, seed: number, rainScale = 1) {
  const v = createVariates(seed, 0);
  const p = new Float64Array(days);
  const pe = new Float64Array(days);
  for (let i = 0; i < days; i++) {
    p[i] = v.uniform() < 0.45 ? v.gamma(0.7, 10 * rainScale) : 0;
    pe[i] = Math.max(0, 2 - 1.8 * Math.cos((2 * Math.PI * i) / 365.25));
  }
  return { p, pe };
}

const total = (a: Float64Array) => a.reduce((x, y) => x + y, 0);

describe('GR4J parameter ranges', () => {
  // Ranges: 80 % confidence intervals of Perrin, Michel & Andréassian (2003), from memory:
  // X1 100–1200 mm, X2 −5 to 3 mm/d, X3 20–300 mm, X4 1.1–2.9 d.
  const ok = { x1: 350, x2: 0, x3: 90, x4: 1.7 };
  it('accepts the median-like set and the range ends', () => {
    expect(() => checkGr4jParameters(ok)).not.toThrow();
    expect(() => checkGr4jParameters({ x1: 100, x2: -5, x3: 20, x4: 1.1 })).not.toThrow();
    expect(() => checkGr4jParameters({ x1: 1200, x2: 3, x3: 300, x4: 2.9 })).not.toThrow();
  });
  it.each([
    ['x1', 99, /X1 = 99 mm is outside \[100, 1200\]/],
    ['x1', 1500, /X1 = 1500/],
    ['x2', -5.1, /X2 = -5.1 mm\/d is outside \[-5, 3\]/],
    ['x2', 3.5, /X2 = 3.5/],
    ['x3', 10, /X3 = 10 mm is outside \[20, 300\]/],
    ['x4', 0.5, /X4 = 0.5 d is outside \[1.1, 2.9\]/],
    ['x4', Number.NaN, /X4 = NaN/],
  ] as const)('refuses %s = %s with a message naming the range and its source', (key, value, message) => {
    const bad = { ...ok, [key]: value };
    expect(() => createGr4j(bad)).toThrow(RangeError);
    expect(() => createGr4j(bad)).toThrow(message);
    expect(() => createGr4j(bad)).toThrow(/Perrin, Michel & Andréassian \(2003\)/);
  });
  it('lists every offending parameter at once', () => {
    expect(() => createGr4j({ x1: 50, x2: 0, x3: 500, x4: 1.7 })).toThrow(/X1 = 50.*X3 = 500/);
  });
});

describe('GR4J water balance', () => {
  // Perrin et al. (2003) Appendix A: with the exchange actually applied (after the max(0, ·) clips),
  // Σ P = Σ AE + Σ Q + Δ(S + R + UH contents) − Σ exchange, exchange > 0 being a gain.
  it.each([
    ['losing catchment, strong export', { x1: 250, x2: -4.5, x3: 60, x4: 1.3 }, 0.6],
    ['gaining catchment', { x1: 800, x2: 2.5, x3: 250, x4: 2.8 }, 1],
    ['no exchange', { x1: 350, x2: 0, x3: 90, x4: 1.7 }, 1.5],
  ])('closes to 1e-9 relative over 10 years: %s', (_name, params, rainScale) => {
    const { p, pe } = forcing(3653, 7, rainScale);
    const run = runGr4j(params, p, pe);
    const n = p.length;
    const storageEnd = run.productionStore[n - 1] + run.routingStore[n - 1] + run.unitHydrographContent[n - 1];
    const lhs = total(p);
    const rhs = total(run.actualEvaporation) + total(run.flow) + (storageEnd - run.initialStorage) - total(run.actualExchange);
    expect(Math.abs(lhs - rhs) / lhs).toBeLessThan(1e-9);
    expect(Math.min(...run.flow, ...run.productionStore, ...run.routingStore)).toBeGreaterThanOrEqual(0);
    expect(Math.max(...run.actualEvaporation.map((ae, i) => ae - pe[i]))).toBeLessThanOrEqual(1e-12);
  });

  it('the clipped branch is exercised: actual exchange differs from 2F on some days when X2 is strongly negative', () => {
    const { p, pe } = forcing(3653, 11, 0.6);
    const run = runGr4j({ x1: 250, x2: -4.5, x3: 60, x4: 1.3 }, p, pe);
    let clipped = 0;
    for (let i = 0; i < p.length; i++) if (Math.abs(run.actualExchange[i] - 2 * run.potentialExchange[i]) > 1e-12) clipped++;
    expect(clipped).toBeGreaterThan(0);
    // Sign as in the paper: X2 < 0 means the catchment loses water.
    expect(total(run.actualExchange)).toBeLessThan(0);
  });

  it('first step from empty stores follows the production-store equation (worked by hand)', () => {
    // S = 0, P = 10 mm, E = 0, X1 = 100: Ps = X1 tanh(Pn/X1) = 100 tanh(0.1) = 9.966799462;
    // Perc = S (1 − (1 + (4/9 · S/X1)^4)^(−1/4)) with S = Ps: (4/9 · 0.09966799)^4 = 3.85025e-6,
    // so Perc ≈ S · x/4 = 9.5937e-6 mm (by hand from the percolation equation).
    const m = createGr4j({ x1: 100, x2: 0, x3: 50, x4: 1.5 });
    const state = new Float64Array(m.stateSize);
    initGr4jState(m, state, 0, { production: 0, routing: 0 });
    const flux = new Float64Array(GR4J_FLUX_COUNT);
    gr4jStep(m, state, 0, 10, 0, flux);
    expect(flux[GR4J_FLUX.storeInflow]).toBeCloseTo(9.966799462, 9);
    expect(flux[GR4J_FLUX.percolation]).toBeCloseTo(9.5937e-6, 9);
    expect(flux[GR4J_FLUX.effectiveRainfall]).toBeCloseTo(10 - 9.966799462 + 9.5937e-6, 9);
    // Pr split 90/10; UH1(1) = (1/1.5)^2.5 = 0.36289, UH2(1) = ½ (1/1.5)^2.5 = 0.18144 (by hand).
    const pr = flux[GR4J_FLUX.effectiveRainfall];
    expect(flux[GR4J_FLUX.uh1Outflow]).toBeCloseTo(0.9 * pr * Math.pow(1 / 1.5, 2.5), 12);
    expect(flux[GR4J_FLUX.uh2Outflow]).toBeCloseTo(0.1 * pr * 0.5 * Math.pow(1 / 1.5, 2.5), 12);
  });

  it('with no input and empty stores nothing flows', () => {
    const run = runGr4j({ x1: 300, x2: 1, x3: 80, x4: 2 }, new Float64Array(30), new Float64Array(30).fill(2), { production: 0, routing: 0 });
    expect(total(run.flow)).toBe(0);
  });

  it('refuses negative or non-finite forcing', () => {
    expect(() => runGr4j({ x1: 300, x2: 0, x3: 80, x4: 2 }, [1, -1], [0, 0])).toThrow(RangeError);
    expect(() => runGr4j({ x1: 300, x2: 0, x3: 80, x4: 2 }, [1, Number.NaN], [0, 0])).toThrow(RangeError);
  });
});
