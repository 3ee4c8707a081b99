import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { curveAt } from '../../src/core/rating/curve-at.ts';
import { flowAtStage } from '../../src/core/rating/flow-at-stage.ts';
import { stageRange, type RatingSegment } from '../../src/core/rating/rating-curve.ts';
import { ratingProblems } from '../../src/core/rating/rating-problems.ts';
import { stageAtFlow } from '../../src/core/rating/stage-at-flow.ts';
import { thresholdProblems } from '../../src/core/rating/threshold-problems.ts';
import { thresholdsInBothUnits } from '../../src/core/rating/threshold-units.ts';

// The power-law form Q = a·(h − h0)^b per segment, as in ISO 18320 and the WMO Manual on Stream
// Gauging (WMO-No. 1044), Vol. II (the form from memory; the documents were not at hand here).
// The numbers below are worked by hand from that equation.
// Low-flow control: Q = 10·(h − 0.5)² for 0.5 ≤ h ≤ 2.5 m; channel control above:
// Q = 40·(h − 1.5)^1.5 for 2.5 ≤ h ≤ 4.5 m (continuous at 2.5 m: 10·2² = 40·1^1.5 = 40 m³/s).
const curve: RatingSegment[] = [
  { fromStage: 0.5, toStage: 2.5, a: 10, b: 2, h0: 0.5 },
  { fromStage: 2.5, toStage: 4.5, a: 40, b: 1.5, h0: 1.5 },
];

describe('rating curve: stage to flow', () => {
  it('gives the hand-worked flows of each segment', () => {
    expect(flowAtStage(curve, 0.5)).toBe(0); // cease-to-flow stage
    expect(flowAtStage(curve, 1.5)).toBeCloseTo(10, 12); // 10·1² (worked by hand)
    expect(flowAtStage(curve, 2)).toBeCloseTo(22.5, 12); // 10·1.5² = 22.5 (worked by hand)
    expect(flowAtStage(curve, 2.5)).toBeCloseTo(40, 12); // the join: 10·2² = 40·1^1.5 (worked by hand)
    expect(flowAtStage(curve, 3.5)).toBeCloseTo(113.137085, 6); // 40·2^1.5 = 80√2 (worked by hand)
    expect(flowAtStage(curve, 4.5)).toBeCloseTo(207.846097, 6); // 40·3^1.5 = 120√3 (worked by hand)
  });

  it('does not extrapolate outside the curve', () => {
    expect(flowAtStage(curve, 0.49)).toBeNaN();
    expect(flowAtStage(curve, 4.51)).toBeNaN();
    expect(flowAtStage(curve, Number.NaN)).toBeNaN();
    expect(stageRange(curve)).toEqual({ from: 0.5, to: 4.5 });
  });
});

describe('rating curve: flow to stage', () => {
  it('inverts the hand-worked flows, h = h0 + (Q/a)^(1/b)', () => {
    expect(stageAtFlow(curve, 22.5)).toBeCloseTo(2, 12); // 0.5 + √(22.5/10) = 0.5 + 1.5
    expect(stageAtFlow(curve, 80 * Math.SQRT2)).toBeCloseTo(3.5, 12); // 1.5 + (2√2)^(2/3) = 1.5 + 2
    expect(stageAtFlow(curve, 0)).toBe(0.5);
    expect(stageAtFlow(curve, 40)).toBeCloseTo(2.5, 12);
    expect(stageAtFlow(curve, 208)).toBeNaN(); // above 120√3 ≈ 207.85
    expect(stageAtFlow(curve, -1)).toBeNaN();
  });

  it('round-trips stage → flow → stage and flow → stage → flow over a three-segment curve', () => {
    // A third segment (overbank) continuous with the second at 4.5 m: a = 207.846097 / 2^1.2.
    const three: RatingSegment[] = [...curve, { fromStage: 4.5, toStage: 7, a: (120 * Math.sqrt(3)) / 2 ** 1.2, b: 1.2, h0: 2.5 }];
    expect(ratingProblems(three, 1e-9).problems).toEqual([]);
    fc.assert(
      fc.property(fc.double({ min: 0.5, max: 7, noNaN: true }), (h) => {
        const q = flowAtStage(three, h);
        expect(Math.abs(stageAtFlow(three, q) - h)).toBeLessThan(1e-9 * Math.max(1, h) + (h - 0.5 < 1e-6 ? 1e-3 : 0));
      }),
    );
    const top = flowAtStage(three, 7);
    fc.assert(
      fc.property(fc.double({ min: 0, max: top, noNaN: true }), (q) => {
        expect(flowAtStage(three, stageAtFlow(three, q))).toBeCloseTo(q, 8);
      }),
    );
  });

  it('gives the join stage for flows inside a small upward jump at a join', () => {
    const jump: RatingSegment[] = [curve[0], { ...curve[1], a: 40.2 }]; // 40 below, 40.2 above: 0.5 %
    expect(ratingProblems(jump, 0.01).problems).toEqual([]);
    expect(stageAtFlow(jump, 40.1)).toBe(2.5);
  });
});

describe('rating curve: validation', () => {
  it('accepts a valid curve and reports its joins', () => {
    const { problems, joins } = ratingProblems(curve, 0.01);
    expect(problems).toEqual([]);
    expect(joins).toEqual([{ stage: 2.5, flowBelow: 40, flowAbove: 40, relativeJump: 0 }]);
  });

  it('names every bad field at once', () => {
    const bad: RatingSegment[] = [
      { fromStage: 0.5, toStage: 0.4, a: 0, b: -1, h0: 0.6 },
      { fromStage: 0.6, toStage: 2, a: 10, b: 2, h0: 0.5 },
    ];
    const paths = ratingProblems(bad, 0.01).problems.map((p) => p.path.join('.'));
    expect(paths).toEqual(['0.a', '0.b', '0.toStage', '0.h0', '1.fromStage']);
  });

  it('refuses segments out of order or overlapping, and a flow jump beyond the tolerance', () => {
    const swapped = [curve[1], curve[0]];
    expect(ratingProblems(swapped, 0.01).problems.map((p) => p.message).join()).toMatch(/contiguous and in ascending stage/);
    const jump: RatingSegment[] = [curve[0], { ...curve[1], a: 44 }]; // 40 → 44 m³/s, 9.1 %
    const { problems } = ratingProblems(jump, 0.01);
    expect(problems).toHaveLength(1);
    expect(problems[0].path).toEqual([1, 'a']);
    expect(problems[0].message).toMatch(/jumps at the join at stage 2.5: 40 m3\/s from segment 0, 44 m3\/s from segment 1 \(9.09 %/);
    expect(ratingProblems(jump, 0.1).problems).toEqual([]);
    expect(ratingProblems([], 0.01).problems[0].message).toMatch(/at least one segment/);
  });
});

describe('rating curve: versions and thresholds', () => {
  it('takes the version in force at a time, and the first one before it (flagged)', () => {
    const versions = [{ validFromMs: 100 }, { validFromMs: 200 }];
    expect(curveAt(versions, 150)).toEqual({ version: versions[0], beforeFirst: false });
    expect(curveAt(versions, 200)).toEqual({ version: versions[1], beforeFirst: false });
    expect(curveAt(versions, 50)).toEqual({ version: versions[0], beforeFirst: true });
    expect(curveAt([], 50)).toBeNull();
  });

  it('gives each threshold in both units, flagging a flow the curve cannot reach', () => {
    const both = thresholdsInBothUnits([{ label: 'action', value: 22.5 }, { label: 'bankfull', level: 3.5 }, { label: 'record', value: 500 }], curve);
    expect(both[0]).toEqual({ label: 'action', value: 22.5, flow: 22.5, level: 2, given: 'flow' }); // 0.5 + √2.25 (worked by hand)
    expect(both[1].given).toBe('level');
    expect(both[1].flow).toBeCloseTo(80 * Math.SQRT2, 9); // 40·2^1.5 (worked by hand)
    expect(both[2]).toEqual({ label: 'record', value: 500, flow: 500, level: null, given: 'flow', outsideCurve: true });
    expect(thresholdsInBothUnits([{ label: 'action', value: 22.5 }], null)).toEqual([{ label: 'action', value: 22.5, flow: 22.5, level: null, given: 'flow' }]);
  });

  it('names a level threshold outside any version, one without a curve, and flows that do not rise', () => {
    const narrow = [{ ...curve[0], toStage: 1.5 }];
    const outside = thresholdProblems([{ label: 'bankfull', level: 2 }], [{ name: 'A', segments: curve }, { name: 'B', segments: narrow }]);
    expect(outside).toEqual([{ index: 0, field: 'level', message: 'threshold "bankfull" (2 m) lies outside the stage range 0.5–1.5 m of the rating curve B' }]);
    expect(thresholdProblems([{ label: 'bankfull', level: 2 }], [])[0].message).toMatch(/no rating curve/);
    // 2 m is 22.5 m³/s, below the flow threshold of 30 before it.
    const order = thresholdProblems([{ label: 'action', value: 30 }, { label: 'bankfull', level: 2 }], [{ name: 'A', segments: curve }]);
    expect(order).toEqual([{ index: 1, field: 'level', message: expect.stringMatching(/"bankfull" \(22.500 m3\/s under the rating curve A\) must be above "action" \(30.000 m3\/s\)/) }]);
  });
});
