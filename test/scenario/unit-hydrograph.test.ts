import { describe, expect, it } from 'vitest';
import { sCurve1, sCurve2, uh1Ordinates, uh2Ordinates } from '../../src/scenario/unit-hydrograph.ts';

const sum = (a: Float64Array) => a.reduce((x, y) => x + y, 0);

describe('GR4J unit hydrographs', () => {
  // Perrin, Michel & Andréassian (2003), Appendix A: SH1 and SH2 reach 1 at X4 and 2·X4, so the
  // ordinates UH(j) = SH(j) − SH(j − 1) telescope to 1 for any X4 > 0.
  it.each([0.3, 0.5, 1, 1.1, 1.7, 2, 2.5, 2.9, 4.2, 7.3])('ordinates sum to one and are non-negative for X4 = %s', (x4) => {
    const uh1 = uh1Ordinates(x4);
    const uh2 = uh2Ordinates(x4);
    expect(uh1.length).toBe(Math.ceil(x4));
    expect(uh2.length).toBe(Math.ceil(2 * x4));
    expect(Math.abs(sum(uh1) - 1)).toBeLessThan(1e-14);
    expect(Math.abs(sum(uh2) - 1)).toBeLessThan(1e-14);
    for (const v of [...uh1, ...uh2]) expect(v).toBeGreaterThanOrEqual(0);
  });

  it('X4 below one day releases everything in the first step', () => {
    expect(Array.from(uh1Ordinates(0.5))).toEqual([1]);
    expect(Array.from(uh2Ordinates(0.5))).toEqual([1]);
  });

  it('matches the S-curve formulas worked by hand for X4 = 2', () => {
    // By hand from SH1(t) = (t/X4)^(5/2): SH1(1) = 0.5^2.5 = 0.1767766953; UH1 = [0.1767767, 0.8232233].
    const uh1 = uh1Ordinates(2);
    expect(uh1[0]).toBeCloseTo(0.1767766953, 10);
    expect(uh1[1]).toBeCloseTo(0.8232233047, 10);
    // SH2(1) = ½·0.5^2.5 = 0.0883883476, SH2(2) = ½, SH2(3) = 1 − ½·0.5^2.5 = 0.9116116524.
    const uh2 = uh2Ordinates(2);
    expect(Array.from(uh2).map((v) => Number(v.toFixed(10)))).toEqual([0.0883883476, 0.4116116524, 0.4116116524, 0.0883883476]);
  });

  it('UH2 is symmetric for integer X4 and SH2 is continuous at X4 (both halves give ½)', () => {
    for (const x4 of [1, 2, 3, 5]) {
      const uh2 = uh2Ordinates(x4);
      for (let j = 0; j < uh2.length; j++) expect(uh2[j]).toBeCloseTo(uh2[uh2.length - 1 - j], 14);
      expect(sCurve2(x4, x4)).toBe(0.5);
      expect(sCurve2(x4 * (1 + 1e-12), x4)).toBeCloseTo(0.5, 10);
    }
    expect(sCurve1(0, 1.7)).toBe(0);
    expect(sCurve1(1.7, 1.7)).toBe(1);
    expect(sCurve2(3.4, 1.7)).toBe(1);
  });

  it('refuses a non-positive time base', () => {
    expect(() => uh1Ordinates(0)).toThrow(RangeError);
    expect(() => uh2Ordinates(Number.NaN)).toThrow(RangeError);
  });
});
