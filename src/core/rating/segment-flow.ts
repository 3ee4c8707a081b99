import type { RatingSegment } from './rating-curve.ts';

/** Q = a·(h − h0)^b of one segment, without looking at its validity range (0 at or below h0). */
export function segmentFlow(s: RatingSegment, stage: number): number {
  const depth = stage - s.h0;
  return depth > 0 ? s.a * depth ** s.b : 0;
}
