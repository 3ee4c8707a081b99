// Input checks shared by the trainers: shapes must agree and targets must be finite.
// Feature values may be NaN (missing); the trees learn where missing values go.

import type { TrainingData } from './types.ts';

export function checkTrainingData(data: TrainingData): void {
  const { x, nRows, nFeatures, y, valid } = data;
  if (!Number.isInteger(nRows) || nRows < 2) throw new RangeError(`nRows must be an integer >= 2, got ${nRows}`);
  if (!Number.isInteger(nFeatures) || nFeatures < 1) throw new RangeError(`nFeatures must be an integer >= 1, got ${nFeatures}`);
  if (!(x instanceof Float32Array)) throw new TypeError('x must be a Float32Array (row-major nRows × nFeatures)');
  if (x.length !== nRows * nFeatures) throw new RangeError(`x has ${x.length} values, expected nRows × nFeatures = ${nRows * nFeatures}`);
  if (y.length !== nRows) throw new RangeError(`y has ${y.length} values, expected nRows = ${nRows}`);
  for (let i = 0; i < nRows; i++) {
    if (!Number.isFinite(y[i])) throw new RangeError(`y[${i}] is not finite`);
  }
  if (valid) {
    if (!(valid.x instanceof Float32Array)) throw new TypeError('valid.x must be a Float32Array');
    if (!Number.isInteger(valid.nRows) || valid.nRows < 1) throw new RangeError('valid.nRows must be an integer >= 1');
    if (valid.x.length !== valid.nRows * nFeatures) throw new RangeError('valid.x must hold valid.nRows × nFeatures values');
    if (valid.y.length !== valid.nRows) throw new RangeError('valid.y must hold valid.nRows values');
    for (let i = 0; i < valid.nRows; i++) {
      if (!Number.isFinite(valid.y[i])) throw new RangeError(`valid.y[${i}] is not finite`);
    }
  }
}

/** Throws unless lo <= v <= hi (and v an integer when asked). */
export function checkParam(name: string, v: number, lo: number, hi: number, integer = false): void {
  if (typeof v !== 'number' || Number.isNaN(v) || v < lo || v > hi || (integer && !Number.isInteger(v))) {
    throw new RangeError(`${name} must be ${integer ? 'an integer ' : ''}in [${lo}, ${hi}], got ${v}`);
  }
}
