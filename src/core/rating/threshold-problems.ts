import { flowAtStage } from './flow-at-stage.ts';
import { stageRange, type RatingSegments } from './rating-curve.ts';
import type { GivenThreshold } from './threshold-units.ts';

/** A curve version as the threshold check needs it; `name` says which one in messages. */
export interface NamedCurve {
  name: string;
  segments: RatingSegments;
}

/**
 * What is wrong with a gauge's thresholds under its curve versions, each naming the threshold:
 * a level threshold needs a curve and must lie within every version's stage range (a curve is not
 * extrapolated); under each version the flows must rise strictly with the list's order.
 */
export function thresholdProblems(thresholds: readonly GivenThreshold[], curves: readonly NamedCurve[]): { index: number; field: 'value' | 'level'; message: string }[] {
  const problems: { index: number; field: 'value' | 'level'; message: string }[] = [];
  thresholds.forEach((t, i) => {
    if (t.level === undefined) return;
    if (curves.length === 0) {
      problems.push({ index: i, field: 'level', message: `threshold "${t.label}" is a water level (${t.level} m) but the gauge has no rating curve to turn it into flow; add one first` });
      return;
    }
    for (const c of curves) {
      const range = stageRange(c.segments);
      if (!(t.level >= range.from && t.level <= range.to)) {
        problems.push({ index: i, field: 'level', message: `threshold "${t.label}" (${t.level} m) lies outside the stage range ${range.from}–${range.to} m of the rating curve ${c.name}` });
      }
    }
  });
  if (problems.length) return problems;
  const flowOf = (t: GivenThreshold, segments: RatingSegments | null) => (t.level === undefined ? t.value! : segments ? flowAtStage(segments, t.level) : NaN);
  for (const c of curves.length ? curves : [null]) {
    for (let i = 1; i < thresholds.length; i++) {
      const below = flowOf(thresholds[i - 1], c?.segments ?? null);
      const here = flowOf(thresholds[i], c?.segments ?? null);
      if (!(here > below)) {
        const t = thresholds[i];
        problems.push({
          index: i,
          field: t.level === undefined ? 'value' : 'level',
          message: `threshold "${t.label}" (${here.toFixed(3)} m3/s${c ? ` under the rating curve ${c.name}` : ''}) must be above "${thresholds[i - 1].label}" (${below.toFixed(3)} m3/s): thresholds rise strictly`,
        });
      }
    }
  }
  return problems;
}
