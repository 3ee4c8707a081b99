/**
 * ROC of probability forecasts of an event (Mason 1982): warn when the forecast probability is at
 * or above a decision level d; hit rate H(d) = warned events / events, false-alarm rate F(d) =
 * warned non-events / non-events. Every distinct forecast probability is a decision level, so
 * the curve is the full empirical one from (0, 0) to (1, 1), and its area by the trapezoidal
 * rule equals the Mann–Whitney probability that an event got a higher forecast than a
 * non-event, ties counted one half (what sklearn's roc_auc_score computes).
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

/**
 * The cases grouped by decision level, highest first: events and non-events per level, and for
 * bootstrap replicates the same counts split by group (issue): entries (level, group, events,
 * non-events) in level order, so a weighted area is one pass over the entries.
 */
export interface RocTable {
  /** Distinct levels, descending. */
  levels: Float64Array;
  events: Float64Array;
  nonEvents: Float64Array;
  /** Per entry: index into levels, group, counts. */
  entryLevel: Int32Array;
  entryGroup: Int32Array;
  entryEvents: Float64Array;
  entryNonEvents: Float64Array;
}

/**
 * Cases with a probability and an outcome (NaN = none), grouped by level; group[i] (default i) is
 * the unit a bootstrap resamples. A counting sort on the rank of each level: no comparator sort.
 */
export function rocTable(prob: ArrayLike<number>, outcome: ArrayLike<number>, group?: ArrayLike<number>): RocTable {
  const okAll = new Int32Array(prob.length);
  let nOk = 0;
  // Forecast probabilities take few distinct values (shares of m members, issued percentages):
  // the levels come from the distinct values, not from sorting every case.
  const seen = new Set<number>();
  for (let i = 0; i < prob.length; i++) {
    if (Number.isNaN(prob[i]) || Number.isNaN(outcome[i])) continue;
    okAll[nOk++] = i;
    seen.add(prob[i]);
  }
  const ok = okAll.subarray(0, nOk);
  const levels = Float64Array.from(seen).sort().reverse();
  const L = levels.length;
  const rankOf = new Map<number, number>();
  levels.forEach((p, r) => rankOf.set(p, r));
  const events = new Float64Array(L);
  const nonEvents = new Float64Array(L);
  const caseRank = new Int32Array(ok.length);
  const start = new Int32Array(L + 1);
  for (let j = 0; j < ok.length; j++) {
    const i = ok[j];
    const r = rankOf.get(prob[i])!;
    caseRank[j] = r;
    start[r + 1]++;
    if (outcome[i] > 0) events[r]++;
    else nonEvents[r]++;
  }
  for (let r = 0; r < L; r++) start[r + 1] += start[r];
  const order = new Int32Array(ok.length);
  const fill = start.slice(0, L);
  for (let j = 0; j < ok.length; j++) order[fill[caseRank[j]]++] = ok[j];
  // Entries: within a level, cases of one group merged (cases arrive in group order when groups ascend with i).
  const eLevel: number[] = [];
  const eGroup: number[] = [];
  const eEv: number[] = [];
  const eNon: number[] = [];
  for (let r = 0; r < L; r++) {
    let last = -1;
    for (let j = start[r]; j < start[r + 1]; j++) {
      const i = order[j];
      const g = group ? group[i] : i;
      if (g !== last || eLevel.length === 0 || eLevel[eLevel.length - 1] !== r) {
        eLevel.push(r);
        eGroup.push(g);
        eEv.push(0);
        eNon.push(0);
        last = g;
      }
      if (outcome[i] > 0) eEv[eEv.length - 1]++;
      else eNon[eNon.length - 1]++;
    }
  }
  return {
    levels,
    events,
    nonEvents,
    entryLevel: Int32Array.from(eLevel),
    entryGroup: Int32Array.from(eGroup),
    entryEvents: Float64Array.from(eEv),
    entryNonEvents: Float64Array.from(eNon),
  };
}

/** Area from per-level weighted counts, highest level first (trapezoid = Mann–Whitney with half ties). */
function areaOf(ev: ArrayLike<number>, non: ArrayLike<number>): number {
  let pos = 0;
  let neg = 0;
  let num = 0;
  for (let r = 0; r < ev.length; r++) {
    // Non-events at this level rank below every earlier event and tie with this level's events.
    num += non[r] * (pos + ev[r] / 2);
    pos += ev[r];
    neg += non[r];
  }
  return pos > 0 && neg > 0 ? num / (pos * neg) : NaN;
}

/**
 * Area with a weight per group (a bootstrap replicate's issue counts). `scratch` needs two
 * arrays of the table's level count.
 */
export function rocAreaWeighted(t: RocTable, weight: ArrayLike<number>, scratch: { ev: Float64Array; non: Float64Array }): number {
  const { ev, non } = scratch;
  ev.fill(0);
  non.fill(0);
  const n = t.entryLevel.length;
  for (let e = 0; e < n; e++) {
    const w = weight[t.entryGroup[e]];
    if (w === 0) continue;
    const r = t.entryLevel[e];
    ev[r] += w * t.entryEvents[e];
    non[r] += w * t.entryNonEvents[e];
  }
  return areaOf(ev, non);
}

export function rocFromTable(t: RocTable): RocCurve {
  let events = 0;
  let nonEvents = 0;
  for (let r = 0; r < t.levels.length; r++) {
    events += t.events[r];
    nonEvents += t.nonEvents[r];
  }
  const points: RocPoint[] = [{ level: Infinity, hitRate: 0, falseAlarmRate: 0 }];
  let hits = 0;
  let falseAlarms = 0;
  for (let r = 0; r < t.levels.length; r++) {
    hits += t.events[r];
    falseAlarms += t.nonEvents[r];
    points.push({ level: t.levels[r], hitRate: events ? hits / events : NaN, falseAlarmRate: nonEvents ? falseAlarms / nonEvents : NaN });
  }
  return { n: events + nonEvents, events, points, area: areaOf(t.events, t.nonEvents) };
}

export function rocCurve(prob: ArrayLike<number>, outcome: ArrayLike<number>): RocCurve {
  return rocFromTable(rocTable(prob, outcome));
}

/** At most `max` points of a curve for a picture: the ends kept, the rest evenly thinned. */
export function thinRocPoints(points: RocPoint[], max: number): RocPoint[] {
  if (points.length <= max) return points;
  const out: RocPoint[] = [];
  for (let j = 0; j < max; j++) out.push(points[Math.round((j * (points.length - 1)) / (max - 1))]);
  return out;
}

/**
 * The ROC area's first-order (Hájek) projection onto groups, for bootstrap intervals: with the
 * placement values of DeLong et al. (1988) — V10 of an event = share of non-events below it (ties
 * half), V01 of a non-event = share of events above it — the area of a reweighted sample is to
 * first order
 *   A(w) ≈ Σ w·ΣV10 / Σ w·events + Σ w·ΣV01 / Σ w·nonEvents − A,
 * a function of per-group sums, so a replicate costs O(blocks) instead of a pass over all cases.
 * Returned per group (length nGroups): the four sums.
 */
export function rocPlacementSums(t: RocTable, nGroups: number): { v10: Float64Array; events: Float64Array; v01: Float64Array; nonEvents: Float64Array; area: number } {
  const L = t.levels.length;
  let P = 0;
  let N = 0;
  for (let r = 0; r < L; r++) {
    P += t.events[r];
    N += t.nonEvents[r];
  }
  // Levels are descending: non-events strictly below level r = those at later levels.
  const below = new Float64Array(L);
  const above = new Float64Array(L);
  let acc = 0;
  for (let r = L - 1; r >= 0; r--) {
    below[r] = acc;
    acc += t.nonEvents[r];
  }
  acc = 0;
  for (let r = 0; r < L; r++) {
    above[r] = acc;
    acc += t.events[r];
  }
  const v10 = new Float64Array(nGroups);
  const events = new Float64Array(nGroups);
  const v01 = new Float64Array(nGroups);
  const nonEvents = new Float64Array(nGroups);
  for (let e = 0; e < t.entryLevel.length; e++) {
    const r = t.entryLevel[e];
    const g = t.entryGroup[e];
    if (t.entryEvents[e] > 0) {
      v10[g] += t.entryEvents[e] * (N > 0 ? (below[r] + t.nonEvents[r] / 2) / N : NaN);
      events[g] += t.entryEvents[e];
    }
    if (t.entryNonEvents[e] > 0) {
      v01[g] += t.entryNonEvents[e] * (P > 0 ? (above[r] + t.events[r] / 2) / P : NaN);
      nonEvents[g] += t.entryNonEvents[e];
    }
  }
  return { v10, events, v01, nonEvents, area: areaOf(t.events, t.nonEvents) };
}
