import { flowAtStage } from './flow-at-stage.ts';
import type { RatingSegments } from './rating-curve.ts';
import { stageAtFlow } from './stage-at-flow.ts';

/** A flood threshold as given: a flow `value` (m³/s) or a water `level` (m). */
export interface GivenThreshold {
  label: string;
  value?: number;
  level?: number;
}

/**
 * A threshold in both units. `value` is the flow the computation compares with (m³/s; the name
 * older clients read), `flow` the same number, `level` the stage (m) — null without a curve, or
 * when a flow threshold lies outside the curve's range (`outsideCurve`).
 */
export interface ThresholdInBothUnits {
  label: string;
  value: number;
  flow: number;
  level: number | null;
  given: 'flow' | 'level';
  outsideCurve?: true;
}

/**
 * Each threshold in flow and level through one curve version. A level threshold outside the curve
 * gives a NaN flow here; callers refuse such thresholds before they are stored (thresholdProblems).
 */
export function thresholdsInBothUnits(thresholds: readonly GivenThreshold[], segments: RatingSegments | null): ThresholdInBothUnits[] {
  return thresholds.map((t) => {
    if (t.level !== undefined) {
      const flow = segments ? flowAtStage(segments, t.level) : NaN;
      return { label: t.label, value: flow, flow, level: t.level, given: 'level' };
    }
    const flow = t.value!;
    if (!segments) return { label: t.label, value: flow, flow, level: null, given: 'flow' };
    const level = stageAtFlow(segments, flow);
    return Number.isNaN(level)
      ? { label: t.label, value: flow, flow, level: null, given: 'flow', outsideCurve: true }
      : { label: t.label, value: flow, flow, level: roundLevel(level), given: 'flow' };
  });
}

/** Levels are shown to the millimetre. */
export function roundLevel(level: number): number {
  return Math.round(level * 1000) / 1000;
}
