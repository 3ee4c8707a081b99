// GR4J unit hydrographs from their S-curves (Perrin, Michel & Andréassian 2003,
// J. Hydrol. 279, 275–289, Appendix A: the S-curves SH1/SH2 and UH(j) = SH(j) − SH(j − 1);
// equation numbering from memory: roughly eqs. 9–14, see gr4j.ts). The exponent 5/2 is the
// paper's fixed value.
// Ordinate j (j = 1..n) is the share of a step's input leaving j − 1 steps later:
// UH(j) = SH(j) − SH(j − 1), so the first ordinate is released in the same step.

const EXPONENT = 2.5;

/** SH1(t): 0 for t ≤ 0, (t/X4)^(5/2) for 0 < t < X4, 1 for t ≥ X4. */
export function sCurve1(t: number, x4: number): number {
  if (t <= 0) return 0;
  if (t >= x4) return 1;
  return Math.pow(t / x4, EXPONENT);
}

/**
 * SH2(t): 0 for t ≤ 0; ½ (t/X4)^(5/2) for 0 < t ≤ X4; 1 − ½ (2 − t/X4)^(5/2) for
 * X4 < t < 2·X4; 1 for t ≥ 2·X4.
 */
export function sCurve2(t: number, x4: number): number {
  if (t <= 0) return 0;
  if (t >= 2 * x4) return 1;
  if (t <= x4) return 0.5 * Math.pow(t / x4, EXPONENT);
  return 1 - 0.5 * Math.pow(2 - t / x4, EXPONENT);
}

function ordinates(sCurve: (t: number, x4: number) => number, length: number, x4: number): Float64Array {
  const out = new Float64Array(length);
  for (let j = 1; j <= length; j++) out[j - 1] = sCurve(j, x4) - sCurve(j - 1, x4);
  return out;
}

/** UH1 ordinates; length ceil(X4) (time base X4 days). */
export function uh1Ordinates(x4: number): Float64Array {
  if (!(x4 > 0) || !Number.isFinite(x4)) throw new RangeError(`X4 must be a positive finite number of days, got ${x4}`);
  return ordinates(sCurve1, Math.ceil(x4), x4);
}

/** UH2 ordinates; length ceil(2·X4) (time base 2·X4 days). */
export function uh2Ordinates(x4: number): Float64Array {
  if (!(x4 > 0) || !Number.isFinite(x4)) throw new RangeError(`X4 must be a positive finite number of days, got ${x4}`);
  return ordinates(sCurve2, Math.ceil(2 * x4), x4);
}
