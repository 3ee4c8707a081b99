import { crpsSorted } from '../scores/crps.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { blockBootstrapColumns, blockLengthFor, type Interval } from './block-bootstrap.ts';
import type { SourceName } from './case.ts';
import type { ClimatologicalRate } from './climatological-rates.ts';
import { COST_LOSS_RATIOS, valueCurveFromRoc, type ValuePoint } from './economic-value.ts';
import { exceedanceBrier } from './exceedance-brier.ts';
import { scoresByForecastClass, type FlowClassScores } from './forecast-flow-classes.ts';
import { GrowableF64 } from './growable.ts';
import { jsonNumber } from './json-number.ts';
import type { SeasonalClimatology } from './reference-forecasts.ts';
import { reliabilityDiagram } from './reliability-diagram.ts';
import { rocFromTable, rocPlacementSums, rocTable, thinRocPoints, type RocPoint } from './roc.ts';
import { thresholdWeightedCrpsSorted } from './threshold-weighted-crps.ts';
import { ValueSorter } from './value-sorter.ts';
import { contingencyScores, type WarningContingency } from './warning-contingency.ts';

/**
 * Verification of the warnings: per flood threshold, for the exceedance at each lead time and for
 * "above at any time in the horizon", the Brier score with its decomposition and skill against
 * the fitting period's base rate, the reliability diagram with consistency bars, the ROC, the
 * relative economic value and the attention flag's 2 × 2 scores; the CRPS with its skill against
 * a seasonal climatology and persistence (overall and per lead), the threshold-weighted CRPS of
 * the flood range, scores by forecast flow class, and paired differences between stages — each
 * headline number with a moving-block bootstrap interval over issue times.
 *
 * Fed one run at a time (addRun); each run is reduced to per-case numbers at once (CRPS,
 * probabilities, median), so the runs themselves are not kept. result() aggregates.
 */
export interface WarningSourceRun {
  /** Member or trajectory j at lead k at [j·nLeads + k] (m³/s); NaN = missing. */
  values: ArrayLike<number>;
  count: number;
  /** Each j is one coherent path over the leads (members, stage trajectories): gives any-time probabilities. */
  trajectories: boolean;
  /** The values at each lead are already ascending (stored quantiles). */
  sortedPerLead?: boolean;
  /** Exceedance probabilities as issued, [threshold·nLeads + lead]; else the share of values above. */
  exceedance?: ArrayLike<number> | null;
  /** Any-time probabilities as issued, per threshold; else from the trajectories (NaN without). */
  anyTime?: ArrayLike<number> | null;
  /**
   * The values per lead instead, already finite and ascending (a run's verification record): lead
   * k is columns.values[columns.start[k] … columns.start[k + 1] − 1]; values and count are then
   * not read, so anyTime must be given.
   */
  columns?: { values: Float64Array; start: Int32Array } | null;
}

export interface WarningRun {
  issueMs: number;
  nLeads: number;
  validMs: ArrayLike<number>;
  /** Observation at each lead's valid time; NaN = not observed. */
  observed: ArrayLike<number>;
  /** Last observation at issue time (persistence); NaN = none. */
  persistence: number;
  /** In the order of the options' sources. */
  sources: WarningSourceRun[];
}

export interface WarningOptions {
  sources: SourceName[];
  thresholds: readonly { label: string; value: number }[];
  /** Attention level of the forecast (probability at or above it raises the flag). */
  attentionLevel: number;
  /** Seasonal climatology for CRPS skill (null = not available). */
  climatology: SeasonalClimatology | null;
  /** Fitting-period rates per threshold (same order), the Brier-skill reference; null = none. */
  climatologicalRates: ClimatologicalRate[] | null;
  /** Lead indices kept for the lead-time scores (any-time events always use the whole horizon). */
  leadRange?: { min?: number; max?: number } | null;
  /** Step length (ms), for the block length: ⌈horizon·step / issue spacing⌉. */
  stepMs: number;
  reliabilityBins?: number;
  diagramResamples?: number;
  replicates?: number;
  /** Central level of every interval (default 0.9). */
  level?: number;
  seed?: number;
  costLossRatios?: readonly number[];
  /** Most ROC points in the output (the area uses all). */
  rocPoints?: number;
}

export interface Scored {
  value: number | null;
  low: number | null;
  high: number | null;
}

export interface EventSourceReport {
  n: number;
  events: number;
  brier: Scored;
  reliability: number | null;
  resolution: number | null;
  uncertainty: number | null;
  withinBinVariance: number | null;
  withinBinCovariance: number | null;
  baseRate: number | null;
  /** 1 − BS/BS of the fitting period's base rate. */
  brierSkill: Scored;
  diagram: { lower: number; upper: number; count: number; meanForecast: number | null; observedFrequency: number | null; consistencyLow: number | null; consistencyHigh: number | null }[];
  roc: { points: { level: number | null; hitRate: number | null; falseAlarmRate: number | null }[]; area: Scored };
  value: { costLoss: number; value: number | null; level: number | null }[];
  /** Attention flag (probability ≥ attention level). */
  attention: Omit<WarningContingency, 'hitRate' | 'falseAlarmRatio' | 'criticalSuccessIndex' | 'falseAlarmRate' | 'peirceSkill' | 'frequencyBias'> & {
    hitRate: Scored;
    falseAlarmRatio: Scored;
    criticalSuccessIndex: Scored;
    falseAlarmRate: number | null;
    peirceSkill: number | null;
    frequencyBias: number | null;
  };
}

export interface EventReport {
  threshold: string;
  value: number;
  event: 'lead-time' | 'any-time';
  climatologicalRate: number | null;
  sources: Partial<Record<SourceName, EventSourceReport>>;
}

export interface SkillRow {
  n: number;
  crps: Scored;
  crpsSkillClimatology: Scored;
  crpsSkillPersistence: Scored;
}

export interface SourceSkill extends SkillRow {
  floodRange: { crps: Scored; skillClimatology: Scored };
  byLead: (SkillRow & { lead: number })[];
  byForecastClass: (Omit<FlowClassScores, 'crps' | 'crpsSkillClimatology' | 'medianBias' | 'from' | 'to'> & { from: number | null; to: number | null; crps: number | null; crpsSkillClimatology: number | null; medianBias: number | null })[];
}

export interface StageDifference {
  first: SourceName;
  second: SourceName;
  /** Mean CRPS of first minus second (negative = first better). */
  crps: Scored;
  floodRangeCrps: Scored;
  /** Brier score difference of the any-time event per threshold. */
  anyTimeBrier: { threshold: string; difference: Scored }[];
}

export interface WarningReport {
  settings: {
    attentionLevel: number;
    level: number;
    replicates: number;
    blockLength: number;
    reliabilityBins: number;
    diagramResamples: number;
    seed: number;
    floodRangeFrom: { label: string; value: number } | null;
    climatology: { observations: number } | null;
  };
  runs: number;
  cases: number;
  anyTimeRuns: number;
  referenceCases: { climatology: number; persistence: number };
  events: EventReport[];
  skill: Partial<Record<SourceName, SourceSkill>>;
  differences: StageDifference[];
}

export interface WarningVerification {
  addRun(run: WarningRun): void;
  result(): WarningReport;
}

const j = jsonNumber;
const scored = (value: number, iv?: Interval): Scored => ({ value: j(value), low: iv ? j(iv.low) : null, high: iv ? j(iv.high) : null });

export function createWarningVerification(options: WarningOptions): WarningVerification {
  const S = options.sources.length;
  const T = options.thresholds.length;
  const thr = options.thresholds.map((t) => t.value);
  if (!(options.attentionLevel >= 0 && options.attentionLevel <= 1)) throw new RangeError('attentionLevel must be in [0, 1]');
  if (options.climatologicalRates && options.climatologicalRates.length !== T) throw new RangeError('climatologicalRates must match thresholds');
  const minLead = options.leadRange?.min ?? 0;
  const maxLead = options.leadRange?.max ?? Infinity;
  // The flood range starts at the lowest threshold.
  const flood = T ? options.thresholds.reduce((a, b) => (b.value < a.value ? b : a)) : null;
  const r = flood ? flood.value : NaN;

  // Per run.
  const runIssue = new GrowableF64();
  let maxLeads = 0;
  const obsAny = Array.from({ length: T }, () => new GrowableF64());
  const probAny = Array.from({ length: S }, () => Array.from({ length: T }, () => new GrowableF64()));
  // Per case.
  const caseRun = new GrowableF64();
  const caseLead = new GrowableF64();
  const caseObs = new GrowableF64();
  const climCrps = new GrowableF64();
  const climTw = new GrowableF64();
  const persCrps = new GrowableF64();
  const crps = Array.from({ length: S }, () => new GrowableF64());
  const tw = Array.from({ length: S }, () => new GrowableF64());
  const median = Array.from({ length: S }, () => new GrowableF64());
  const prob = Array.from({ length: S }, () => Array.from({ length: T }, () => new GrowableF64()));
  const rows = Array.from({ length: S }, () => new Float64Array(128));
  const sorters = Array.from({ length: S }, () => new ValueSorter());
  const sortedCols: Float64Array[] = [];

  function addRun(run: WarningRun): void {
    if (run.sources.length !== S) throw new RangeError(`a run needs ${S} sources`);
    const H = run.nLeads;
    if (run.observed.length < H || run.validMs.length < H) throw new RangeError('observed and validMs must hold nLeads values');
    const ri = runIssue.length;
    runIssue.push(run.issueMs);
    maxLeads = Math.max(maxLeads, H);
    let all = H > 0;
    let maxY = -Infinity;
    for (let k = 0; k < H; k++) {
      const y = run.observed[k];
      if (!Number.isFinite(y)) all = false;
      else if (y > maxY) maxY = y;
    }
    for (let t = 0; t < T; t++) obsAny[t].push(all ? (maxY > thr[t] ? 1 : 0) : NaN);
    for (let s = 0; s < S; s++) {
      const f = run.sources[s];
      for (let t = 0; t < T; t++) probAny[s][t].push(f.anyTime ? f.anyTime[t] : f.trajectories ? anyTimeShare(f, H, thr[t]) : NaN);
    }
    for (let k = Math.max(0, minLead); k < H && k <= maxLead; k++) {
      const y = run.observed[k];
      if (!Number.isFinite(y)) continue;
      // Every source needs a value at this lead, so all are scored on the same cases.
      let ok = true;
      for (let s = 0; s < S && ok; s++) {
        const col = column(run.sources[s], H, k, s);
        if (col.length === 0) ok = false;
        else sortedCols[s] = col;
      }
      if (!ok) continue;
      caseRun.push(ri);
      caseLead.push(k);
      caseObs.push(y);
      const clim = options.climatology;
      climCrps.push(clim ? clim.crpsAt(run.validMs[k], y) : NaN);
      climTw.push(clim && flood ? clim.crpsAt(run.validMs[k], y, r) : NaN);
      persCrps.push(Number.isFinite(run.persistence) ? Math.abs(run.persistence - y) : NaN);
      for (let s = 0; s < S; s++) {
        const col = sortedCols[s];
        const f = run.sources[s];
        crps[s].push(crpsSorted(col, y));
        tw[s].push(flood ? thresholdWeightedCrpsSorted(col, y, r) : NaN);
        median[s].push(quantileSorted(col, 0.5));
        for (let t = 0; t < T; t++) prob[s][t].push(f.exceedance ? f.exceedance[t * H + k] : shareAbove(col, thr[t]));
      }
    }
  }

  /** Finite values of one source at lead k, sorted (in that source's own reusable buffer). */
  function column(f: WarningSourceRun, H: number, k: number, s: number): Float64Array {
    if (f.columns) return f.columns.values.subarray(f.columns.start[k], f.columns.start[k + 1]);
    if (rows[s].length < f.count) rows[s] = new Float64Array(f.count);
    const row = rows[s];
    let m = 0;
    let nonNeg = true;
    for (let i = 0; i < f.count; i++) {
      const x = f.values[i * H + k];
      if (Number.isFinite(x)) {
        row[m++] = x + 0;
        if (x < 0) nonNeg = false;
      }
    }
    if (f.sortedPerLead) return row.subarray(0, m);
    return sorters[s].sort(row, m, nonNeg);
  }

  function result(): WarningReport {
    const nRuns = runIssue.length;
    const nCases = caseRun.length;
    const issueMs = runIssue.view();
    const cRun = caseRun.view();
    const cLead = caseLead.view();
    const cObs = caseObs.view();
    const level = options.level ?? 0.9;
    const R = options.replicates ?? 500;
    const seed = options.seed ?? 1;
    const bins = options.reliabilityBins ?? 10;
    const resamples = options.diagramResamples ?? 200;
    const L = Math.min(Math.max(1, nRuns), blockLengthFor(issueMs, maxLeads * options.stepMs));
    // Statistics are functions of per-run sums ("columns"); the bootstrap re-sums the columns per replicate.
    const stats: ((sums: Float64Array) => number)[] = [];
    const register = (f: (sums: Float64Array) => number): number => stats.push(f) - 1;
    const columns: Float64Array[] = [];
    const totals: number[] = [];
    /** A column of per-run sums; returns its index. */
    // Columns equal in every value (case counts, reference scores: the same for every source) are
    // kept once, so the bootstrap sums fewer columns; a statistic reads the same sums either way.
    const seen = new Map<number, number[]>();
    const sameColumn = (a: Float64Array, b: Float64Array) => {
      for (let i = 0; i < a.length; i++) if (a[i] !== b[i] && !(Number.isNaN(a[i]) && Number.isNaN(b[i]))) return false;
      return true;
    };
    const addColumn = (a: Float64Array): number => {
      let t = 0;
      for (let i = 0; i < a.length; i++) if (!Number.isNaN(a[i])) t += a[i];
      const same = seen.get(t);
      if (same) for (const c of same) if (sameColumn(columns[c], a)) return c;
      totals.push(t);
      const c = columns.push(a) - 1;
      if (same) same.push(c);
      else seen.set(t, [c]);
      return c;
    };
    /** Per-run sums of per-case values (finite ones only). */
    const perRun = (v: (c: number) => number): number => {
      const a = new Float64Array(nRuns);
      for (let c = 0; c < nCases; c++) {
        const x = v(c);
        if (Number.isFinite(x)) a[cRun[c]] += x;
      }
      return addColumn(a);
    };
    const total = (col: number) => totals[col];
    const ratio = (a: number, b: number) => (S: Float64Array) => S[a] / S[b];
    const skill = (a: number, b: number) => (S: Float64Array) => 1 - S[a] / S[b];
    // Deferred outputs: built once the bootstrap intervals are known.
    const finish: ((iv: Interval[]) => void)[] = [];

    // ---- events ----
    const events: EventReport[] = [];
    const leadOutcome = thr.map((x) => Float64Array.from(cObs, (y) => (y > x ? 1 : 0)));
    const eventInputs = (t: number, kind: 'lead-time' | 'any-time', s: number) =>
      kind === 'lead-time'
        ? { p: prob[s][t].view(), o: leadOutcome[t], group: cRun }
        : { p: probAny[s][t].view(), o: obsAny[t].view(), group: null as Float64Array | null };
    const anyTimeBrierPrefix: number[][] = Array.from({ length: S }, () => []);
    let anyTimeRuns = 0;
    for (let t = 0; t < T; t++) {
      for (const kind of ['lead-time', 'any-time'] as const) {
        const rate = options.climatologicalRates?.[t];
        const c = rate ? (kind === 'lead-time' ? rate.atLead : rate.anyTime) : NaN;
        const ev: EventReport = { threshold: options.thresholds[t].label, value: thr[t], event: kind, climatologicalRate: j(c), sources: {} };
        events.push(ev);
        for (let s = 0; s < S; s++) {
          const { p, o, group } = eventInputs(t, kind, s);
          const lvl = options.attentionLevel;
          // Per-run sums, one pass: squared error, its climatological reference, cases, and the flag's table.
          const cols = Array.from({ length: 6 }, () => new Float64Array(nRuns));
          const [bsC, refC, nC, aC, bC, cC] = cols;
          for (let i = 0; i < p.length; i++) {
            const pi = p[i];
            const oi = o[i];
            if (Number.isNaN(pi) || Number.isNaN(oi)) continue;
            const g = group ? group[i] : i;
            bsC[g] += (pi - oi) * (pi - oi);
            refC[g] += (c - oi) * (c - oi);
            nC[g]++;
            if (pi >= lvl) {
              if (oi > 0) aC[g]++;
              else bC[g]++;
            } else if (oi > 0) cC[g]++;
          }
          const [pBs, pRef, pN, pA, pB, pC] = cols.map(addColumn);
          if (kind === 'any-time') {
            anyTimeBrierPrefix[s][t] = pBs;
            anyTimeBrierPrefix[s][t + T] = pN;
            if (s === 0) anyTimeRuns = total(pN);
          }
          const b = exceedanceBrier(p, o, c, bins);
          const diagram = reliabilityDiagram(p, o, { bins, resamples, level, seed });
          const table = rocTable(p, o, group ?? undefined);
          const roc = rocFromTable(table);
          const place = rocPlacementSums(table, nRuns);
          const [pV10, pEv, pV01, pNon] = [place.v10, place.events, place.v01, place.nonEvents].map(addColumn);
          const vc = valueCurveFromRoc(roc, options.costLossRatios ?? COST_LOSS_RATIOS);
          const ct = contingencyScores(lvl, total(pA), total(pB), total(pC), total(pN) - total(pA) - total(pB) - total(pC));
          const ids = {
            brier: register(ratio(pBs, pN)),
            skill: Number.isFinite(c) ? register(skill(pBs, pRef)) : -1,
            // Linearised (DeLong placements): see rocPlacementSums.
            area: register((S) => S[pV10] / S[pEv] + S[pV01] / S[pNon] - place.area),
            hit: register((S) => S[pA] / (S[pA] + S[pC])),
            far: register((S) => S[pB] / (S[pA] + S[pB])),
            csi: register((S) => S[pA] / (S[pA] + S[pB] + S[pC])),
          };
          const name = options.sources[s];
          finish.push((iv) => {
            ev.sources[name] = {
              n: b.n,
              events: b.events,
              brier: scored(b.brier, iv[ids.brier]),
              reliability: j(b.reliability),
              resolution: j(b.resolution),
              uncertainty: j(b.uncertainty),
              withinBinVariance: j(b.withinBinVariance),
              withinBinCovariance: j(b.withinBinCovariance),
              baseRate: j(b.baseRate),
              brierSkill: scored(b.skill, ids.skill >= 0 ? iv[ids.skill] : undefined),
              diagram: diagram.map((d) => ({
                lower: d.lower,
                upper: d.upper,
                count: d.count,
                meanForecast: j(d.meanForecast),
                observedFrequency: j(d.observedFrequency),
                consistencyLow: j(d.consistencyLow),
                consistencyHigh: j(d.consistencyHigh),
              })),
              roc: { points: thinRocPoints(roc.points, options.rocPoints ?? 60).map(rocJson), area: scored(roc.area, iv[ids.area]) },
              value: vc.points.map(valueJson),
              attention: {
                ...ct,
                hitRate: scored(ct.hitRate, iv[ids.hit]),
                falseAlarmRatio: scored(ct.falseAlarmRatio, iv[ids.far]),
                criticalSuccessIndex: scored(ct.criticalSuccessIndex, iv[ids.csi]),
                falseAlarmRate: j(ct.falseAlarmRate),
                peirceSkill: j(ct.peirceSkill),
                frequencyBias: j(ct.frequencyBias),
              },
            };
          });
        }
      }
    }

    // ---- CRPS skill ----
    const climV = climCrps.view();
    const climTwV = climTw.view();
    const persV = persCrps.view();
    let climCases = 0;
    let persCases = 0;
    for (let c = 0; c < nCases; c++) {
      if (Number.isFinite(climV[c])) climCases++;
      if (Number.isFinite(persV[c])) persCases++;
    }
    const leads = [...new Set(cLead)].sort((a, b) => a - b);
    const skillOut: Partial<Record<SourceName, SourceSkill>> = {};
    const crpsPrefix: number[] = [];
    const twPrefix: number[] = [];
    const pCount = perRun(() => 1);
    const leadIndex = new Map(leads.map((k, i) => [k, i]));
    /**
     * CRPS rows of source s, overall (row 0) and per lead (row 1 + lead index), from one pass over
     * the cases: per-run sums of CRPS, cases, CRPS where the climatology exists and its CRPS, the
     * same for persistence.
     */
    const skillRows = (s: number) => {
      const cr = crps[s].view();
      const nRows = 1 + leads.length;
      const cols = Array.from({ length: nRows * 6 }, () => new Float64Array(nRuns));
      for (let c = 0; c < nCases; c++) {
        const r = cRun[c];
        const x = cr[c];
        const lr = 1 + leadIndex.get(cLead[c])!;
        for (let pass = 0; pass < 2; pass++) {
          const o = (pass === 0 ? 0 : lr) * 6;
          cols[o][r] += x;
          cols[o + 1][r] += 1;
          if (Number.isFinite(climV[c])) {
            cols[o + 2][r] += x;
            cols[o + 3][r] += climV[c];
          }
          if (Number.isFinite(persV[c])) {
            cols[o + 4][r] += x;
            cols[o + 5][r] += persV[c];
          }
        }
      }
      return Array.from({ length: nRows }, (_, row) => {
        const [pCr, pN, pCrC, pClim, pCrP, pPers] = cols.slice(row * 6, row * 6 + 6).map(addColumn);
        const ids = [register(ratio(pCr, pN)), register(skill(pCrC, pClim)), register(skill(pCrP, pPers))];
        const est = [total(pCr) / total(pN), 1 - total(pCrC) / total(pClim), 1 - total(pCrP) / total(pPers)];
        return { pCr, n: total(pN), ids, est };
      });
    };
    type SkillCols = ReturnType<typeof skillRows>[number];
    for (let s = 0; s < S; s++) {
      const name = options.sources[s];
      const rowsOfSource = skillRows(s);
      const all = rowsOfSource[0];
      crpsPrefix[s] = all.pCr;
      const twV = tw[s].view();
      const pTw = perRun((c) => twV[c]);
      twPrefix[s] = pTw;
      const pTwC = perRun((c) => (Number.isFinite(climTwV[c]) ? twV[c] : NaN));
      const pClimTw = perRun((c) => climTwV[c]);
      const twIds = [register(ratio(pTw, pCount)), register(skill(pTwC, pClimTw))];
      const twEst = [total(pTw) / total(pCount), 1 - total(pTwC) / total(pClimTw)];
      const byLead = leads.map((k, i) => ({ k, row: rowsOfSource[1 + i] }));
      const classes = scoresByForecastClass(median[s].view(), cObs, crps[s].view(), climV, options.thresholds);
      finish.push((iv) => {
        const rowJson = (x: SkillCols): SkillRow => ({
          n: x.n,
          crps: scored(x.est[0], iv[x.ids[0]]),
          crpsSkillClimatology: scored(x.est[1], iv[x.ids[1]]),
          crpsSkillPersistence: scored(x.est[2], iv[x.ids[2]]),
        });
        skillOut[name] = {
          ...rowJson(all),
          floodRange: { crps: scored(twEst[0], iv[twIds[0]]), skillClimatology: scored(twEst[1], iv[twIds[1]]) },
          byLead: byLead.map(({ k, row: x }) => ({ lead: k, ...rowJson(x) })),
          byForecastClass: classes.map((c) => ({ ...c, from: c.from === null ? null : j(c.from), to: c.to === null ? null : j(c.to), crps: j(c.crps), crpsSkillClimatology: j(c.crpsSkillClimatology), medianBias: j(c.medianBias) })),
        };
      });
    }

    // ---- paired differences between stages ----
    const differences: StageDifference[] = [];
    const pairs: [number, number][] = [];
    for (let a = 1; a < S; a++) for (let b = 0; b < a; b++) pairs.push([a, b]);
    for (const [a, b] of pairs) {
      const diff = (pa: number, pb: number, pn: number) => ({
        est: (total(pa) - total(pb)) / total(pn),
        id: register((S) => (S[pa] - S[pb]) / S[pn]),
      });
      const dC = diff(crpsPrefix[a], crpsPrefix[b], pCount);
      const dT = diff(twPrefix[a], twPrefix[b], pCount);
      const dB = Array.from({ length: T }, (_, t) => diff(anyTimeBrierPrefix[a][t], anyTimeBrierPrefix[b][t], anyTimeBrierPrefix[a][t + T]));
      finish.push((iv) => {
        differences.push({
          first: options.sources[a],
          second: options.sources[b],
          crps: scored(dC.est, iv[dC.id]),
          floodRangeCrps: scored(dT.est, iv[dT.id]),
          anyTimeBrier: dB.map((d, t) => ({ threshold: options.thresholds[t].label, difference: scored(d.est, iv[d.id]) })),
        });
      });
    }

    const iv = nRuns ? blockBootstrapColumns(columns, stats, { blockLength: L, replicates: R, level, seed }) : stats.map(() => ({ low: NaN, high: NaN }));
    for (const f of finish) f(iv);
    return {
      settings: {
        attentionLevel: options.attentionLevel,
        level,
        replicates: R,
        blockLength: L,
        reliabilityBins: bins,
        diagramResamples: resamples,
        seed,
        floodRangeFrom: flood ? { label: flood.label, value: flood.value } : null,
        climatology: options.climatology ? { observations: options.climatology.size } : null,
      },
      runs: nRuns,
      cases: nCases,
      anyTimeRuns,
      referenceCases: { climatology: climCases, persistence: persCases },
      events,
      skill: skillOut,
      differences,
    };
  }

  return { addRun, result };
}

function rocJson(p: RocPoint) {
  return { level: j(p.level), hitRate: j(p.hitRate), falseAlarmRate: j(p.falseAlarmRate) };
}

function valueJson(v: ValuePoint) {
  return { costLoss: v.costLoss, value: j(v.value), level: v.level === null ? null : j(v.level) };
}

/** Share of sorted values above thr. */
function shareAbove(sorted: Float64Array, thr: number): number {
  let lo = 0;
  let hi = sorted.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (sorted[mid] > thr) hi = mid;
    else lo = mid + 1;
  }
  return (sorted.length - lo) / sorted.length;
}

/** Share of paths with a value above thr at some lead (paths with a missing value left out). */
export function anyTimeShare(f: WarningSourceRun, H: number, thr: number): number {
  let n = 0;
  let above = 0;
  for (let i = 0; i < f.count; i++) {
    let ok = true;
    let hit = false;
    for (let k = 0; k < H; k++) {
      const x = f.values[i * H + k];
      if (!Number.isFinite(x)) {
        ok = false;
        break;
      }
      if (x > thr) hit = true;
    }
    if (!ok) continue;
    n++;
    if (hit) above++;
  }
  return n ? above / n : NaN;
}
