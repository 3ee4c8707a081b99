import type { LeadGrowthUsed } from '../core/stochastic/archive-choice.ts';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import type { RatingSegment } from '../core/rating/rating-curve.ts';
import { stageAtFlow } from '../core/rating/stage-at-flow.ts';
import { roundLevel } from '../core/rating/threshold-units.ts';
import { COARSE_TRAJECTORIES, monteCarloStandardError } from '../core/stochastic/stochastic-stage.ts';
import { CAUTION } from './caution.ts';
import { isoUtc } from './series-input.ts';

/** The stored and served shape of one corrected run (see the OpenAPI document). */
export interface ForecastView {
  id: string;
  gaugeId: string;
  gaugeName: string;
  issueTime: string;
  createdAt: string;
  source: string;
  unit: 'm3/s';
  timeStep: string;
  caution: string;
  status: 'corrected' | 'degraded';
  degradedReason: string | null;
  modelVersion: { id: string; label: string } | null;
  /**
   * The error archive the stochastic stage drew from: of the corrected or the raw members, per lead
   * time (past runs) or lead-free (continuous simulations); leadTimes = how many it can serve.
   * Absent on runs stored before it was recorded.
   */
  errorArchive?: ErrorArchiveUsed;
  /**
   * Issue-time updating: the observation the corrected members were updated on, or why they were
   * not. Absent on runs stored before updating existed and for versions without an updater.
   */
  updating?: UpdatingUsed;
  /**
   * How the run was read: the body's form and unit, the conversion to m3/s if any, and the warm-up
   * (what the run gave, what the model reads, what was taken from the stored archive). Absent on
   * runs stored before it was recorded.
   */
  input?: RunInputUsed;
  seed: number;
  trajectories: number;
  attentionLevel: number;
  leadTimes: string[];
  validTimes: string[];
  /**
   * `levels`: the same quantiles as water levels (m) through the rating curve in force at issue time
   * (`ratingCurve`), null where a flow lies outside the curve; absent without a curve.
   */
  quantiles: { probabilities: number[]; values: number[][]; levels?: (number | null)[][] };
  /** The rating curve version the levels came from (absent without one); beforeFirst: issued before its valid-from. */
  ratingCurve?: { validFrom: string; beforeFirst: boolean; stageUnit: 'm' };
  /**
   * Per threshold: P(flow > value) per lead and at any time in the horizon, each with its
   * Monte-Carlo standard error √(p(1 − p)/trajectories) (binomial; an upper bound with several members,
   * whose draws are stratified). Absent on runs stored before it was recorded.
   */
  thresholds: {
    label: string;
    /** The flow compared with, m3/s (`flow` is the same number). */
    value: number;
    flow?: number;
    /** Water level, m, where the gauge has a rating curve (null outside it or without one). */
    level?: number | null;
    /** The unit the threshold was set in. */
    given?: 'flow' | 'level';
    exceedance: number[];
    exceedanceStandardError?: number[];
    anyTime: number;
    anyTimeStandardError?: number;
    firstLikelyLeadTime: string | null;
    attention: boolean;
  }[];
  /** Present when the run has fewer than COARSE_TRAJECTORIES trajectories: the probabilities are coarse. */
  probabilityNote?: string;
  ensemble: { raw: { id: string; values: number[] }[]; corrected: { id: string; values: number[] }[] | null };
  recent: { times: string[]; observed: (number | null)[] };
  timings: { featuresMs: number; inferenceMs: number; stochasticMs: number; totalMs: number };
}

export interface UpdatingUsed {
  status: 'on' | 'off';
  /** Why updating is off (null when on). */
  reason: string | null;
  /** The observation used: from the run's body ('run') or the gauge's archive ('archive'). */
  observation: { time: string; value: number; source: 'run' | 'archive'; ageSteps: number } | null;
  method: 'ar1' | 'phi-per-lead' | null;
}

export interface RunInputUsed {
  form: 'json' | 'csv' | 'netcdf';
  /** The flow unit the body was in. */
  unit: string;
  /** Null when the body was in m3/s already. */
  conversion: { from: string; to: 'm3/s'; factor: number; source: string } | null;
  warmup: {
    stepsInRun: number;
    stepsNeeded: number;
    fromArchive: { series: string; from: string; to: string; steps: number }[];
  };
}

export interface ErrorArchiveUsed {
  id: string;
  kind: 'corrected' | 'raw';
  leadMode: 'lead-free' | 'per-lead' | 'updating';
  leadTimes: number;
  cases: number;
  templates: number;
  /** Where the errors' growth with lead time comes from (absent on runs stored before it was recorded). */
  leadGrowth?: LeadGrowthUsed;
}

const round = (x: number, digits = 4) => {
  // 1e4 spelled out for the common case: the same number 10 ** 4 gives, without a power per value.
  const f = digits === 4 ? 1e4 : 10 ** digits;
  return Math.round(x * f) / f;
};

/** round(x) of each of values[from … from + n − 1], as a plain array. */
function roundedRange(values: ArrayLike<number>, from: number, n: number): number[] {
  const out: number[] = []; // pushed, not preallocated: a packed array, which JSON.stringify walks faster
  for (let i = 0; i < n; i++) out.push(Math.round(values[from + i] * 1e4) / 1e4);
  return out;
}

export interface ViewInput {
  id: string;
  gauge: { id: string; name: string; timeStep: string; stepSeconds: number; thresholds: { label: string; value: number; level?: number | null; given?: 'flow' | 'level' }[] };
  /** The rating curve in force at issue time, for levels beside flows. */
  ratingCurve?: { validFrom: string; beforeFirst: boolean; segments: readonly RatingSegment[] } | null;
  issueTimeMs: number;
  createdAt: string;
  source: string;
  status: 'corrected' | 'degraded';
  degradedReason: string | null;
  modelVersion: { id: string; label: string } | null;
  errorArchive?: ErrorArchiveUsed;
  updating?: UpdatingUsed;
  input?: RunInputUsed;
  seed: number;
  nDraws: number;
  attentionLevel: number;
  probs: number[];
  nLeads: number;
  memberIds: string[];
  raw: Float64Array;
  corrected: Float64Array | null;
  /** [lead·probs.length + q] */
  quantiles: ArrayLike<number>;
  /** [threshold·nLeads + lead] */
  exceedance: ArrayLike<number>;
  anyTime: ArrayLike<number>;
  firstLikelyLead: (number | null)[];
  recent: { times: string[]; observed: (number | null)[] };
  timings: ForecastView['timings'];
}

export function buildForecastView(v: ViewInput): ForecastView {
  const H = v.nLeads;
  const stepMs = v.gauge.stepSeconds * 1000;
  const members = (values: Float64Array) => v.memberIds.map((id, m) => ({ id, values: roundedRange(values, m * H, H) }));
  return {
    id: v.id,
    gaugeId: v.gauge.id,
    gaugeName: v.gauge.name,
    issueTime: isoUtc(v.issueTimeMs),
    createdAt: v.createdAt,
    source: v.source,
    unit: 'm3/s',
    timeStep: v.gauge.timeStep,
    caution: CAUTION,
    status: v.status,
    degradedReason: v.degradedReason,
    modelVersion: v.modelVersion,
    errorArchive: v.errorArchive,
    ...(v.updating ? { updating: v.updating } : {}),
    ...(v.input ? { input: v.input } : {}),
    seed: v.seed,
    trajectories: v.nDraws,
    attentionLevel: v.attentionLevel,
    leadTimes: Array.from({ length: H }, (_, k) => formatDurationSeconds((k + 1) * v.gauge.stepSeconds)),
    validTimes: Array.from({ length: H }, (_, k) => isoUtc(v.issueTimeMs + (k + 1) * stepMs)),
    quantiles: {
      probabilities: v.probs,
      values: v.probs.map((_, q) => Array.from({ length: H }, (_, k) => round(v.quantiles[k * v.probs.length + q]))),
      ...(v.ratingCurve ? { levels: quantileLevels(v, v.ratingCurve.segments) } : {}),
    },
    ...(v.ratingCurve ? { ratingCurve: { validFrom: v.ratingCurve.validFrom, beforeFirst: v.ratingCurve.beforeFirst, stageUnit: 'm' as const } } : {}),
    thresholds: v.gauge.thresholds.map((t, j) => {
      const anyTime = round(v.anyTime[j]);
      const first = v.firstLikelyLead[j];
      const exceedance = Array.from({ length: H }, (_, k) => round(v.exceedance[j * H + k]));
      return {
        label: t.label,
        value: t.value,
        flow: t.value,
        level: t.level ?? null,
        given: t.given ?? 'flow',
        exceedance,
        exceedanceStandardError: exceedance.map((p) => round(monteCarloStandardError(p, v.nDraws))),
        anyTime,
        anyTimeStandardError: round(monteCarloStandardError(anyTime, v.nDraws)),
        firstLikelyLeadTime: first === null || first === undefined ? null : formatDurationSeconds((first + 1) * v.gauge.stepSeconds),
        attention: anyTime >= v.attentionLevel,
      };
    }),
    ...(v.nDraws < COARSE_TRAJECTORIES ? { probabilityNote: coarseNote(v.nDraws) } : {}),
    ensemble: { raw: members(v.raw), corrected: v.corrected ? members(v.corrected) : null },
    recent: v.recent,
    timings: v.timings,
  };
}

/** Which member series a forecast answer carries: none, the corrected ones, or raw and corrected (as stored). */
export type MembersChoice = 'none' | 'corrected' | 'all';

/**
 * The stored answer with fewer member series, for dashboards that draw only quantiles and
 * probabilities (the members are most of a run's bytes). `members` says what was kept; an
 * omitted series is left out, never emptied, so no reader takes it for "no members".
 */
export function withMembers(storedJson: string, members: MembersChoice): string {
  if (members === 'all') return storedJson;
  const { ensemble, ...view } = JSON.parse(storedJson) as ForecastView;
  const memberCount = ensemble.corrected?.length ?? ensemble.raw.length;
  if (members === 'none') return JSON.stringify({ ...view, members: 'none', memberCount });
  return JSON.stringify({ ...view, members: 'corrected', memberCount, ensemble: { corrected: ensemble.corrected } });
}

/** Each quantile as a water level through the curve; null outside its flow range (no extrapolation). */
function quantileLevels(v: ViewInput, segments: readonly RatingSegment[]): (number | null)[][] {
  return v.probs.map((_, q) =>
    Array.from({ length: v.nLeads }, (_, k) => {
      const level = stageAtFlow(segments, v.quantiles[k * v.probs.length + q]);
      return Number.isNaN(level) ? null : roundLevel(level);
    }),
  );
}

function coarseNote(n: number): string {
  return `Only ${n} trajectories: the probabilities are coarse (steps of ${round(100 / n, 1)} points, standard error up to ${round(50 / Math.sqrt(n), 1)} points); ask for at least ${COARSE_TRAJECTORIES}.`;
}

const pct = (p: number) => (p >= 0.995 ? '>99%' : p > 0 && p < 0.005 ? '<1%' : `${Math.round(p * 100)}%`);

function quantileRow(f: ForecastView, p: number): number[] | null {
  const i = f.quantiles.probabilities.findIndex((x) => Math.abs(x - p) < 1e-9);
  return i >= 0 ? f.quantiles.values[i] : null;
}

/** The plain-text table for a terminal: lead time, median, 5–95 % range, probability per threshold. */
export function forecastText(f: ForecastView): string {
  const median = quantileRow(f, 0.5);
  const lo = quantileRow(f, 0.05);
  const hi = quantileRow(f, 0.95);
  const num = (x: number | undefined) => (x === undefined ? '–' : x >= 100 ? x.toFixed(0) : x >= 10 ? x.toFixed(1) : x.toFixed(2));
  // With a rating curve, the median also as a water level and each threshold in both units.
  const levels = f.quantiles.levels;
  const medianLevel = levels ? levels[f.quantiles.probabilities.findIndex((x) => Math.abs(x - 0.5) < 1e-9)] : undefined;
  const withLevel = medianLevel !== undefined;
  const header = ['lead', 'valid time (UTC)', 'median', ...(withLevel ? ['median level (m)'] : []), '5–95 % range', ...f.thresholds.map((t) => `P>${t.label} (${t.level === undefined || t.level === null ? t.value : thresholdUnits(t)})`)];
  const rows = f.leadTimes.map((lead, k) => [
    lead,
    f.validTimes[k].replace('T', ' ').replace(/:00Z$/, 'Z'),
    num(median?.[k]),
    ...(withLevel ? [medianLevel[k] === null ? 'off curve' : medianLevel[k]!.toFixed(2)] : []),
    `${num(lo?.[k])} – ${num(hi?.[k])}`,
    ...f.thresholds.map((t) => pct(t.exceedance[k])),
  ]);
  rows.push(['any time', 'in the horizon', '', ...(withLevel ? [''] : []), '', ...f.thresholds.map((t) => `${pct(t.anyTime)}${t.attention ? ' !' : ''}`)]);
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (cells: string[]) => cells.map((c, i) => (i < 2 ? c.padEnd(widths[i]) : c.padStart(widths[i]))).join('  ').trimEnd();
  const status = f.status === 'degraded' ? `DEGRADED: ${f.degradedReason}` : `corrected with model version ${f.modelVersion?.id} (${f.modelVersion?.label})`;
  const u = f.updating;
  const updating = !u ? [] : u.status === 'on' && u.observation ? [`updated on the observation of ${u.observation.time} (${u.observation.value} m3/s, from the ${u.observation.source})`] : [`updating off: ${u.reason}`];
  const i = f.input;
  const taken = i?.warmup.fromArchive.map((x) => `${x.series} ${x.from} – ${x.to}`).join('; ');
  const input = !i
    ? []
    : [
        `posted as ${i.form.toUpperCase()}${i.conversion ? `, flows converted from ${i.conversion.from} (× ${i.conversion.factor})` : ''}; ${taken ? `taken from the archive: ${taken}` : 'nothing taken from the archive'}`,
      ];
  return [
    `${f.gaugeName} (${f.gaugeId}) — issued ${f.issueTime} — flows in m3/s`,
    `${status}; ${f.trajectories} trajectories, seed ${f.seed}`,
    ...updating,
    ...input,
    `CAUTION: ${f.caution}`,
    '',
    line(header),
    line(widths.map((w) => '-'.repeat(w))),
    ...rows.map(line),
    '',
    f.thresholds.some((t) => t.attention) ? `! = probability at or above the attention level (${pct(f.attentionLevel)})` : `no threshold reaches the attention level (${pct(f.attentionLevel)})`,
    `sampling error of each probability: at most ±${round(50 / Math.sqrt(f.trajectories), 1)} points (one standard error, ${f.trajectories} trajectories)`,
    ...(f.probabilityNote ? [`NOTE: ${f.probabilityNote}`] : []),
    ...(f.errorArchive?.leadGrowth?.source === 'none' ? [`NOTE: the bands come from ${f.errorArchive.leadGrowth.note}`] : []),
    '',
  ].join('\n');
}

/** A threshold's flow, and its water level where the gauge has a rating curve: `85.3 m3/s = 2.4 m`. */
function thresholdUnits(t: ForecastView['thresholds'][number]): string {
  return t.level === undefined || t.level === null ? `${t.value} m3/s` : `${t.value} m3/s = ${t.level} m`;
}

/**
 * CSV, one row per lead time: quantiles, exceedance probability per threshold, then what names the
 * run and the caution in every row. No comment lines: Python's csv module and pandas read it as is
 * (the caution also travels as the `Caution` HTTP header, src/api/formats.ts).
 */
export function forecastCsv(f: ForecastView): string {
  const header = [
    'lead_time',
    'valid_time',
    ...f.quantiles.probabilities.map((p) => `q${String(Math.round(p * 1000) / 10).replace('.', '_')} (m3/s)`),
    ...f.thresholds.map((t) => `p_exceed ${t.label} (${thresholdUnits(t)})`),
    'gauge_id',
    'issue_time',
    'status',
    'seed',
    'caution',
  ];
  const lines = [header.map(csvCell).join(',')];
  f.leadTimes.forEach((lead, k) => {
    lines.push([lead, f.validTimes[k], ...f.quantiles.values.map((row) => row[k]), ...f.thresholds.map((t) => t.exceedance[k]), f.gaugeId, f.issueTime, f.status, f.seed, f.caution].map(csvCell).join(','));
  });
  return `${lines.join('\n')}\n`;
}

/** One CSV cell, quoted only when it must be (RFC 4180). */
export function csvCell(value: string | number | null): string {
  if (value === null) return '';
  const s = String(value);
  return /[",\n\r]/.test(s) ? `"${s.replace(/"/g, '""')}"` : s;
}

export { isoUtc };

/** Midpoint levels (i − 0.5)/100 stored with every run (src/services/correct-run.ts). */
export const STORED_LEVELS = Array.from({ length: 100 }, (_, i) => (i + 0.5) / 100);

/** Every quantile a run stored: the levels it was asked for and the 100 midpoint levels, ascending. */
export function storedQuantileSet(f: ForecastView, percentiles: number[][] | null): { probabilities: number[]; values: number[][] } {
  const byLevel = new Map<number, number[]>();
  f.quantiles.probabilities.forEach((p, q) => byLevel.set(p, f.quantiles.values[q]));
  if (percentiles) {
    STORED_LEVELS.forEach((p, j) => {
      // float32 in the store: back to the 4 decimals the values were rounded to before storing.
      if (![...byLevel.keys()].some((x) => Math.abs(x - p) < 1e-9)) byLevel.set(p, percentiles.map((row) => round(row[j])));
    });
  }
  const probabilities = [...byLevel.keys()].sort((a, b) => a - b);
  return { probabilities, values: probabilities.map((p) => byLevel.get(p)!) };
}

/** The quantile set as CSV: one row per lead time, one column per level, the caution in every row. */
export function quantileSetCsv(f: ForecastView, set: { probabilities: number[]; values: number[][] }): string {
  const header = ['lead_time', 'valid_time', ...set.probabilities.map((p) => `q${String(Math.round(p * 1000) / 10).replace('.', '_')} (m3/s)`), 'gauge_id', 'issue_time', 'caution'];
  const lines = [header.map(csvCell).join(',')];
  f.leadTimes.forEach((lead, k) => lines.push([lead, f.validTimes[k], ...set.values.map((row) => row[k]), f.gaugeId, f.issueTime, f.caution].map(csvCell).join(',')));
  return `${lines.join('\n')}\n`;
}
