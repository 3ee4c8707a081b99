/**
 * A stage–discharge relation (rating curve) as a piecewise power law: in each segment, valid for
 * stages fromStage ≤ h ≤ toStage (metres), Q = a·(h − h0)^b (m³/s), with h0 the stage of zero flow
 * (the gauge-height offset) of that segment's control. This is the form of ISO 18320 and of the WMO
 * Manual on Stream Gauging (WMO-No. 1044), Vol. II (from memory).
 */
export interface RatingSegment {
  fromStage: number;
  toStage: number;
  a: number;
  b: number;
  h0: number;
}

/** Segments in ascending stage, contiguous (each starts where the one below ends). */
export type RatingSegments = readonly RatingSegment[];

/** The stage range the curve is valid for, [lowest fromStage, highest toStage]. */
export function stageRange(segments: RatingSegments): { from: number; to: number } {
  return { from: segments[0].fromStage, to: segments[segments.length - 1].toStage };
}
