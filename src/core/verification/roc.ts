/**
 * ROC of probability forecasts of an event (Mason 1982): warn when the forecast probability is at
 * or above a decision level d; hit rate H(d) = warned events / events, false-alarm rate F(d) =
 * warned non-events / non-events. Every distinct forecast probability is a decision level, so
 * the curve is the full empirical one from (0, 0) to (1, 1), and its area by the trapezoidal
 * rule equals the Mann–Whitney probability that an event got a higher forecast than a
 * non-event, ties counted one half (what sklearn's roc_auc_score computes).
 * Cases may carry weights (bootstrap replicates): the same sums, weighted.
 */
export interface RocPoint {
  /** Warn when probability ≥ level. */
  level: number;
  hitRate: number;
  falseAlarmRate: number;
}

export interface RocCurve {
  n: number;
  events: number;
  /** From level +∞ (0, 0) down to the smallest probability (1, 1). */
  points: RocPoint[];
  area: number;
}

/** Case order by descending probability (NaN cases left out), for rocAreaSorted. */
export function rocOrder(prob: ArrayLike<number>, outcome: ArrayLike<number>): Int32Array {
  const idx: number[] = [];
  for (let i = 0; i < prob.length; i++) if (!Number.isNaN(prob[i]) && !Number.isNaN(outcome[i])) idx.push(i);
  idx.sort((a, b) => prob[b] - prob[a]);
  return Int32Array.from(idx);
}

/**
 * Area under the ROC from cases in rocOrder; weight of case i = weight[group[i]] (group: the
 * case's issue in a bootstrap), or 1 without weights. NaN when there are no events or no non-events.
 */
export function rocAreaSorted(
  order: Int32Array,
  prob: ArrayLike<number>,
  outcome: ArrayLike<number>,
  weight?: ArrayLike<number>,
  group?: ArrayLike<number>,
): number {
  let pos = 0;
  let neg = 0;
  let num = 0;
  let i = 0;
  while (i < order.length) {
    const level = prob[order[i]];
    let wp = 0;
    let wn = 0;
    while (i < order.length && prob[order[i]] === level) {
      const c = order[i];
      const w = weight ? weight[group ? group[c] : c] : 1;
      if (outcome[c] > 0) wp += w;
      else wn += w;
      i++;
    }
    // Non-events at this level rank below every earlier event and tie with this level's events.
    num += wn * (pos + wp / 2);
    pos += wp;
    neg += wn;
  }
  return pos > 0 && neg > 0 ? num / (pos * neg) : NaN;
}

export function rocCurve(prob: ArrayLike<number>, outcome: ArrayLike<number>): RocCurve {
  const order = rocOrder(prob, outcome);
  let events = 0;
  for (const c of order) if (outcome[c] > 0) events++;
  const nonEvents = order.length - events;
  const points: RocPoint[] = [{ level: Infinity, hitRate: 0, falseAlarmRate: 0 }];
  let hits = 0;
  let falseAlarms = 0;
  let i = 0;
  while (i < order.length) {
    const level = prob[order[i]];
    while (i < order.length && prob[order[i]] === level) {
      if (outcome[order[i]] > 0) hits++;
      else falseAlarms++;
      i++;
    }
    points.push({ level, hitRate: events ? hits / events : NaN, falseAlarmRate: nonEvents ? falseAlarms / nonEvents : NaN });
  }
  return { n: order.length, events, points, area: rocAreaSorted(order, prob, outcome) };
}

/** At most `max` points of a curve for a picture: the ends kept, the rest evenly thinned. */
export function thinRocPoints(points: RocPoint[], max: number): RocPoint[] {
  if (points.length <= max) return points;
  const out: RocPoint[] = [];
  for (let j = 0; j < max; j++) out.push(points[Math.round((j * (points.length - 1)) / (max - 1))]);
  return out;
}
