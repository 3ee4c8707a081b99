import fc from 'fast-check';
import { describe, it } from 'vitest';
import { brierScores } from '../../src/core/scores/brier.ts';
import { crpsPerCase } from '../../src/core/scores/crps.ts';
import { hersbachDecomposition } from '../../src/core/scores/hersbach.ts';
import { intervalCoverage } from '../../src/core/scores/interval-coverage.ts';
import { pitValues } from '../../src/core/scores/pit.ts';

// Property: every ensemble score depends on the members as a set, not on their order.
const cases = fc
  .record({
    m: fc.integer({ min: 1, max: 8 }),
    n: fc.integer({ min: 1, max: 12 }),
    seed: fc.integer({ min: 0, max: 1e6 }),
  })
  .chain(({ m, n, seed }) =>
    fc.record({
      m: fc.constant(m),
      seed: fc.constant(seed),
      ens: fc.array(fc.integer({ min: -20, max: 20 }), { minLength: m * n, maxLength: m * n }), // integers: ties happen
      obs: fc.array(fc.option(fc.integer({ min: -20, max: 20 }), { nil: null }), { minLength: n, maxLength: n }),
      perm: fc.array(fc.nat(), { minLength: m * n, maxLength: m * n }),
    }),
  );

function permuteRows(ens: number[], m: number, keys: number[]): number[] {
  const out = [...ens];
  for (let c = 0; c < ens.length / m; c++) {
    const idx = Array.from({ length: m }, (_, j) => j).sort((a, b) => keys[c * m + a] - keys[c * m + b] || a - b);
    for (let j = 0; j < m; j++) out[c * m + j] = ens[c * m + idx[j]];
  }
  return out;
}

const same = (a: ArrayLike<number>, b: ArrayLike<number>) =>
  a.length === b.length && Array.from(a).every((v, i) => Object.is(v, b[i]) || Math.abs(v - b[i]) <= 1e-12 * (1 + Math.abs(v)));

describe('scores do not depend on member order (fast-check)', () => {
  it('CRPS, fair CRPS, Hersbach, Brier, interval coverage and PIT', () => {
    fc.assert(
      fc.property(cases, ({ m, seed, ens, obs, perm }) => {
        const p = permuteRows(ens, m, perm);
        if (!same(crpsPerCase(ens, obs, m), crpsPerCase(p, obs, m))) return false;
        if (m > 1 && !same(crpsPerCase(ens, obs, m, true), crpsPerCase(p, obs, m, true))) return false;
        if (obs.some((o) => o !== null)) {
          const h1 = hersbachDecomposition(ens, obs, m);
          const h2 = hersbachDecomposition(p, obs, m);
          if (!same([h1.crps, h1.reliability, h1.potential], [h2.crps, h2.reliability, h2.potential])) return false;
          const b1 = brierScores(ens, obs, m, [-5, 0, 5]);
          const b2 = brierScores(p, obs, m, [-5, 0, 5]);
          if (!same(b1.map((b) => b.brier), b2.map((b) => b.brier))) return false;
          const i1 = intervalCoverage(ens, obs, m, 0.8);
          const i2 = intervalCoverage(p, obs, m, 0.8);
          if (!same([i1.coverage, i1.meanWidth], [i2.coverage, i2.meanWidth])) return false;
        }
        return same(pitValues(ens, obs, m, seed), pitValues(p, obs, m, seed));
      }),
    );
  });
});
