import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { expectedImprovement } from '../../../src/models/tuning/expected-improvement.ts';

// Reference: test/fixtures/gp-sklearn/make.py — closed form (best − μ − ξ)Φ(u) + σφ(u) with
// scipy.stats.norm (Debian python3-scipy 1.10.1).
const fixture = JSON.parse(
  readFileSync(new URL('../../fixtures/gp-sklearn/gp-sklearn.json', import.meta.url), 'utf8'),
) as { expectedImprovement: { rows: number[][] } };

describe('expected improvement (minimisation)', () => {
  it('matches the closed form from scipy.stats.norm', () => {
    const rows = fixture.expectedImprovement.rows;
    expect(rows.length).toBe(96);
    for (const [mu, sd, best, xi, ei] of rows) {
      const ours = expectedImprovement(mu, sd, best, xi);
      // relative 1e-10: at u = −10 the two terms cancel by a factor 100, amplifying Φ rounding
      expect(Math.abs(ours - ei), `${[mu, sd, best, xi]}`).toBeLessThanOrEqual(1e-10 * ei);
    }
  });

  it('is the plain improvement when there is no uncertainty', () => {
    expect(expectedImprovement(1, 0, 3)).toBe(2);
    expect(expectedImprovement(3, 0, 1)).toBe(0);
  });
});
