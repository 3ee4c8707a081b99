import type { RatingSegments } from './rating-curve.ts';
import { segmentFlow } from './segment-flow.ts';

export interface RatingProblem {
  /** Path below the segments list: [index, field]. */
  path: (string | number)[];
  message: string;
}

/** A join whose two segments' flows differ, relatively, by at most the tolerance. */
export interface RatingJoin {
  stage: number;
  flowBelow: number;
  flowAbove: number;
  relativeJump: number;
}

/**
 * Everything wrong with a curve's segments, all at once: each segment needs finite numbers,
 * a > 0, b > 0, fromStage < toStage and stages at or above its h0 (h − h0 ≥ 0, so the power is
 * defined and the flow not negative); segments must be in ascending stage and contiguous; at each
 * join the flows of the two segments may differ by at most `joinTolerance` relative to the larger.
 * The joins are returned with their jumps, so an answer can show them.
 */
export function ratingProblems(segments: RatingSegments, joinTolerance: number): { problems: RatingProblem[]; joins: RatingJoin[] } {
  const problems: RatingProblem[] = [];
  const joins: RatingJoin[] = [];
  if (segments.length === 0) return { problems: [{ path: [], message: 'a rating curve needs at least one segment' }], joins };
  segments.forEach((s, i) => {
    for (const key of ['fromStage', 'toStage', 'a', 'b', 'h0'] as const) {
      if (!Number.isFinite(s[key])) problems.push({ path: [i, key], message: 'must be a finite number' });
    }
    if (!(s.a > 0)) problems.push({ path: [i, 'a'], message: 'a must be greater than 0' });
    if (!(s.b > 0)) problems.push({ path: [i, 'b'], message: 'b must be greater than 0' });
    if (!(s.toStage > s.fromStage)) problems.push({ path: [i, 'toStage'], message: `toStage must be above fromStage (${s.fromStage})` });
    if (!(s.fromStage >= s.h0)) problems.push({ path: [i, 'h0'], message: `h0 must not be above the segment's lowest stage (${s.fromStage}): the flow is a·(h − h0)^b with h ≥ h0` });
    if (i === 0) return;
    const below = segments[i - 1];
    if (s.fromStage !== below.toStage) {
      const word = s.fromStage > below.toStage ? 'leaves a gap above' : 'overlaps';
      problems.push({ path: [i, 'fromStage'], message: `segments must be contiguous and in ascending stage: fromStage ${s.fromStage} ${word} segment ${i - 1}, which ends at ${below.toStage}` });
      return;
    }
    const flowBelow = segmentFlow(below, s.fromStage);
    const flowAbove = segmentFlow(s, s.fromStage);
    const larger = Math.max(flowBelow, flowAbove);
    const relativeJump = larger > 0 ? Math.abs(flowAbove - flowBelow) / larger : 0;
    if (relativeJump > joinTolerance) {
      problems.push({
        path: [i, 'a'],
        message: `the flow jumps at the join at stage ${s.fromStage}: ${round(flowBelow)} m3/s from segment ${i - 1}, ${round(flowAbove)} m3/s from segment ${i} (${round(100 * relativeJump, 2)} %, more than the tolerance of ${round(100 * joinTolerance, 2)} %)`,
      });
    }
    joins.push({ stage: s.fromStage, flowBelow, flowAbove, relativeJump });
  });
  return { problems, joins };
}

const round = (x: number, digits = 4) => Math.round(x * 10 ** digits) / 10 ** digits;
