// GR4J parameters and the ranges we accept.
// Ranges: the 80 % confidence intervals of the calibrated values over 429 catchments reported
// by Perrin, Michel & Andréassian (2003, J. Hydrol. 279, Table of parameter statistics) —
// from memory: X1 100–1200 mm, X2 −5 to 3 mm/d, X3 20–300 mm, X4 1.1–2.9 d. The same bounds
// appear as calibration bounds in public GR4J calibration code. Parameters outside them are
// refused: the demo should only ever use values the model's authors found typical.

export interface Gr4jParameters {
  /** Production store capacity X1 (mm). */
  readonly x1: number;
  /** Groundwater exchange coefficient X2 (mm/d); > 0 imports water, < 0 exports it. */
  readonly x2: number;
  /** Routing store capacity X3 (mm), one day ahead. */
  readonly x3: number;
  /** Unit-hydrograph time base X4 (d). */
  readonly x4: number;
}

export interface ParameterRange {
  readonly min: number;
  readonly max: number;
  readonly unit: string;
}

export const GR4J_RANGES: Readonly<Record<keyof Gr4jParameters, ParameterRange>> = {
  x1: { min: 100, max: 1200, unit: 'mm' },
  x2: { min: -5, max: 3, unit: 'mm/d' },
  x3: { min: 20, max: 300, unit: 'mm' },
  x4: { min: 1.1, max: 2.9, unit: 'd' },
};

const SOURCE = '80 % confidence intervals of Perrin, Michel & Andréassian (2003), J. Hydrol. 279';

/** Throws a RangeError naming every parameter outside its range. */
export function checkGr4jParameters(p: Gr4jParameters): void {
  const problems: string[] = [];
  for (const key of Object.keys(GR4J_RANGES) as (keyof Gr4jParameters)[]) {
    const r = GR4J_RANGES[key];
    const v = p[key];
    if (typeof v !== 'number' || !Number.isFinite(v) || v < r.min || v > r.max) {
      problems.push(`${key.toUpperCase()} = ${String(v)} ${r.unit} is outside [${r.min}, ${r.max}] ${r.unit}`);
    }
  }
  if (problems.length > 0) {
    throw new RangeError(`GR4J parameters refused: ${problems.join('; ')} (ranges: ${SOURCE})`);
  }
}
