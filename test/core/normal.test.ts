import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { erfc, normalCdf, normalPdf, normalQuantile } from '../../src/core/scores/normal.ts';

// Reference values from Debian's python3-scipy 1.10.1 (scipy.special.ndtr, erfc, ndtri),
// made by test/fixtures/quantiles/make.py.
const ref = JSON.parse(
  readFileSync(new URL('../fixtures/quantiles/reference.json', import.meta.url), 'utf8'),
) as { scipy_version: string; normal: { z: number[]; cdf: number[]; pdf: number[]; erfc: number[]; p: number[]; ppf: number[] } };

function relErr(a: number, b: number): number {
  if (a === b) return 0;
  return Math.abs(a - b) / Math.abs(b);
}

describe('standard normal functions', () => {
  it(`Φ, φ and erfc match scipy ${ref.scipy_version}`, () => {
    const { z, cdf, pdf } = ref.normal;
    z.forEach((x, i) => {
      expect(relErr(normalCdf(x), cdf[i]), `cdf(${x})`).toBeLessThan(1e-12);
      expect(relErr(normalPdf(x), pdf[i]), `pdf(${x})`).toBeLessThan(1e-14);
      const e = ref.normal.erfc[i];
      if (e > 0) expect(relErr(erfc(x), e), `erfc(${x})`).toBeLessThan(1e-12);
    });
  });

  it(`Φ⁻¹ matches scipy ${ref.scipy_version} ndtri`, () => {
    const { p, ppf } = ref.normal;
    p.forEach((q, i) => expect(relErr(normalQuantile(q), ppf[i]) < 1e-12 || Math.abs(normalQuantile(q) - ppf[i]) < 1e-14, `ppf(${q})`).toBe(true));
    expect(normalQuantile(0)).toBe(-Infinity);
    expect(normalQuantile(1)).toBe(Infinity);
  });
});
