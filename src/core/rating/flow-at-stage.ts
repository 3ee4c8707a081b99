import type { RatingSegments } from './rating-curve.ts';
import { segmentFlow } from './segment-flow.ts';

/**
 * Flow (m³/s) at a stage (m) from the segment whose range holds it; at a join the upper segment
 * answers. NaN outside the curve's stage range: a rating curve is not extrapolated.
 */
export function flowAtStage(segments: RatingSegments, stage: number): number {
  if (!Number.isFinite(stage) || segments.length === 0) return NaN;
  for (let i = segments.length - 1; i >= 0; i--) {
    const s = segments[i];
    if (stage >= s.fromStage && stage <= s.toStage) return segmentFlow(s, stage);
  }
  return NaN;
}
