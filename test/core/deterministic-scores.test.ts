import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { deterministicScores } from '../../src/core/scores/deterministic-scores.ts';

// numpy reference (Debian python3-numpy 1.24.2), made by test/fixtures/scores/make.py.
const ref = JSON.parse(readFileSync(new URL('../fixtures/scores/reference.json', import.meta.url), 'utf8'));

describe('deterministic scores', () => {
  it('KGE of sim = 1.1 × obs is 1 − √0.02 (r = 1, α = β = 1.1; worked by hand from Gupta et al. 2009)', () => {
    const obs = [3, 7, 1, 12, 5, 9, 2];
    const s = deterministicScores(obs.map((v) => 1.1 * v), obs);
    expect(s.r).toBeCloseTo(1, 12);
    expect(s.alpha).toBeCloseTo(1.1, 12);
    expect(s.beta).toBeCloseTo(1.1, 12);
    expect(s.kge).toBeCloseTo(1 - Math.sqrt(0.02), 12);
    // KGE' (Kling et al. 2012): γ = CV ratio = 1, so KGE' = 1 − |β − 1| = 0.9 (by hand).
    expect(s.gamma).toBeCloseTo(1, 12);
    expect(s.kgePrime).toBeCloseTo(0.9, 12);
  });

  it('NSE is 1 for a perfect simulation and 0 for the mean of the observations (Nash & Sutcliffe 1970, by definition)', () => {
    const obs = [3, 7, 1, 12, 5, 9, 2];
    const mean = obs.reduce((a, b) => a + b) / obs.length;
    expect(deterministicScores(obs, obs).nse).toBe(1);
    expect(deterministicScores(obs, obs).kge).toBe(1);
    expect(deterministicScores(obs.map(() => mean), obs).nse).toBeCloseTo(0, 14);
  });

  it('skips missing observations (NaN or null) and reports the count', () => {
    const s = deterministicScores([1, 2, 3, 4], [1, null, NaN, 6]);
    expect(s.n).toBe(2);
    expect(s.mae).toBe(1);
    expect(s.bias).toBe(-1);
    expect(s.percentBias).toBeCloseTo((100 * -2) / 7, 12);
  });

  it(`matches numpy ${ref.numpy_version} on a series with gaps`, () => {
    const d = ref.deterministic;
    const s = deterministicScores(d.sim, d.obs);
    expect(s.n).toBe(d.n);
    for (const k of ['mae', 'rmse', 'bias', 'percentBias', 'nse', 'r', 'alpha', 'beta', 'gamma', 'kge', 'kgePrime'] as const) {
      expect(s[k], k).toBeCloseTo(d[k], 12);
    }
  });
});
