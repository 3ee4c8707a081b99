import type { RatingSegments } from './rating-curve.ts';
import { segmentFlow } from './segment-flow.ts';

/**
 * The inverse of flowAtStage: the stage (m) at which the curve gives this flow (m³/s),
 * h = h0 + (Q/a)^(1/b) in the lowest segment whose flow range [Q(fromStage), Q(toStage)] holds it.
 * NaN outside the curve's flow range. Where a join's small jump (within the accepted tolerance)
 * leaves flows between the two segments' values, they take the join's stage.
 */
export function stageAtFlow(segments: RatingSegments, flow: number): number {
  if (!Number.isFinite(flow) || segments.length === 0) return NaN;
  for (let i = 0; i < segments.length; i++) {
    const s = segments[i];
    const low = segmentFlow(s, s.fromStage);
    const high = segmentFlow(s, s.toStage);
    if (flow < low) return i > 0 && flow >= segmentFlow(segments[i - 1], segments[i - 1].toStage) ? s.fromStage : NaN;
    if (flow <= high) {
      if (flow === 0) return s.fromStage;
      const stage = s.h0 + (flow / s.a) ** (1 / s.b);
      // Rounding may step a hair outside the segment.
      return Math.min(s.toStage, Math.max(s.fromStage, stage));
    }
  }
  return NaN;
}
