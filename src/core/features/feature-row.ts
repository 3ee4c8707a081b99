import { yearFraction } from '../day-of-year.ts';
import type { FeatureSpec } from './feature-spec.ts';

const TWO_PI = 2 * Math.PI;

/**
 * Writes one feature row at `out[offset…]` in featureNames order. This is the only place a
 * feature value is computed, so training and serving rows cannot drift apart.
 * `simAt` / `forcingAt[f]` index the row's valid time in `sim` / `forcings[f]` (lags read
 * backwards from there). Returns false, leaving a partial row, when any input is not finite.
 */
export function writeFeatureRow(
  spec: FeatureSpec,
  out: Float32Array,
  offset: number,
  sim: ArrayLike<number>,
  simAt: number,
  forcings: ArrayLike<number>[],
  forcingAt: Int32Array,
  validTime: number,
  leadHours: number,
  issueError: number,
): boolean {
  let o = offset;
  for (let j = 0; j <= spec.simLags; j++) {
    const v = sim[simAt - j];
    if (!Number.isFinite(v)) return false;
    out[o++] = v;
  }
  for (let f = 0; f < spec.forcings.length; f++) {
    const series = forcings[f];
    const at = forcingAt[f];
    for (let j = 0; j <= spec.forcings[f].lags; j++) {
      const v = series[at - j];
      if (!Number.isFinite(v)) return false;
      out[o++] = v;
    }
  }
  if (spec.seasonal) {
    const angle = TWO_PI * yearFraction(validTime);
    out[o++] = Math.sin(angle);
    out[o++] = Math.cos(angle);
  }
  if (spec.leadTime) out[o++] = leadHours;
  if (spec.issueError) {
    if (!Number.isFinite(issueError)) return false;
    out[o++] = issueError;
  }
  return true;
}
