import { alphaIndex, finiteSorted } from '../scores/alpha-index.ts';
import { brierDecomposition, type BrierResult } from '../scores/brier.ts';
import { deterministicScores } from '../scores/deterministic-scores.ts';
import { createPrng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { rankHistogram } from '../scores/rank-histogram.ts';
import { SOURCE_NAMES, sourceValues, type SourceName, type VerificationCase } from './case.ts';
import { GrowableF64 } from './growable.ts';
import { jsonNumber } from './json-number.ts';
import { pairedDifference, type PairedDifference } from './paired-difference.ts';
import { pitCoverage } from './randomised-pit.ts';
import { SizeStudyAccumulator, type SizeStudyOptions, type SizeStudyResult } from './size-study.ts';
import { SourceAccumulator } from './source-accumulator.ts';
import { classifySpread, type SpreadAssessment, type SpreadOptions } from './spread-class.ts';

/**
 * Side-by-side verification of the raw ensemble, the corrected ensemble and the stochastic
 * stage over the same cases. A case is used only when its observation is present, its lead is
 * in range and every compared forecast has at least one finite value, so all three are scored
 * on exactly the same cases. Cases can be streamed (createComparison) so a long hindcast never
 * holds all samples in memory. The output is plain JSON (numbers or null, no typed arrays).
 *
 * Conventions: point scores of the median and of the mean (NSE, Nash & Sutcliffe 1970; KGE,
 * Gupta et al. 2009; KGE', Kling et al. 2012); CRPS standard (empirical CDF of the values) and
 * fair (Ferro 2014); Hersbach (2000) reliability and potential; PIT randomised among ties,
 * alpha index with plotting positions t/(n + 1) (Renard et al. 2010); bands between the
 * definition-7 quantiles (1 ∓ level)/2 of the values; Brier score of the exceedance event
 * "value > threshold" with its Murphy (1973) decomposition on m + 1 bins (exact for m equal
 * members) and a reliability diagram on `reliabilityBins` equal bins.
 */
export interface CompareOptions {
  /** Seed of the PIT randomisation (default 1). */
  seed?: number;
  /** Lead indices to keep, inclusive; unset ends are open. */
  leadRange?: { min?: number; max?: number } | null;
  /** Central interval levels (default 0.5, 0.9, 0.95). */
  levels?: number[];
  /** Flow thresholds (m³/s) for Brier scores; event = value > threshold. */
  thresholds?: number[];
  /** Bins of the reliability diagram (default 10). */
  reliabilityBins?: number;
  /** Bins of the PIT histogram (default 10). */
  pitBins?: number;
  /** Most points in the QQ data (default 100); more cases are summarised by PIT quantiles. */
  qqPoints?: number;
  /** Batches for the standard error of paired CRPS differences (default 20). */
  batches?: number;
  /** Compare the stochastic stage; default: when the first case carries samples or quantiles. */
  includeStochastic?: boolean;
  /** Ensemble-size study run on the same cases (default none). */
  sizeStudy?: SizeStudyOptions | null;
  /** Spread classification settings (see classifySpread). */
  spread?: SpreadOptions;
}

export interface PointScores {
  n: number;
  mae: number | null;
  rmse: number | null;
  bias: number | null;
  percentBias: number | null;
  nse: number | null;
  kge: number | null;
  kgePrime: number | null;
  /** Pearson correlation. */
  r: number | null;
  /** σ_forecast/σ_observed (KGE's α). */
  variabilityRatio: number | null;
  /** μ_forecast/μ_observed (KGE's β). */
  biasRatio: number | null;
}

export interface CrpsReport {
  crps: number | null;
  /** Fair CRPS (Ferro 2014), over the cases with at least 2 values. */
  fairCrps: number | null;
  /** 1 − CRPS/CRPS of the raw ensemble. */
  skillVsRaw: number | null;
  /** 1 − fair CRPS/fair CRPS of the raw ensemble. */
  fairSkillVsRaw: number | null;
  hersbach: {
    /** Cases used (those with the member count of the first case). */
    n: number;
    /** Cases left out because their member count differed. */
    skipped: number;
    crps: number | null;
    reliability: number | null;
    potential: number | null;
    uncertainty: number | null;
    resolution: number | null;
  };
}

export interface IntervalReport {
  level: number;
  /** Share of observations inside the band between the definition-7 quantiles (1 ∓ level)/2. */
  coverage: number | null;
  /** Share of PIT values inside [(1 − level)/2, (1 + level)/2]; expectation = level when calibrated. */
  pitCoverage: number | null;
  meanWidth: number | null;
}

export interface ReliabilityBin {
  lower: number;
  upper: number;
  count: number;
  meanForecast: number | null;
  observedFrequency: number | null;
}

export interface BrierReport {
  threshold: number;
  n: number;
  brier: number | null;
  reliability: number | null;
  resolution: number | null;
  uncertainty: number | null;
  baseRate: number | null;
  /** 1 − Brier/uncertainty (skill against the sample climatology). */
  skill: number | null;
  diagram: ReliabilityBin[];
}

export interface LeadReport {
  lead: number;
  n: number;
  crps: number | null;
  alphaIndex: number | null;
  pitCoverage90: number | null;
  maeMedian: number | null;
}

export interface SourceReport {
  source: SourceName;
  n: number;
  members: { min: number; max: number };
  median: PointScores;
  mean: PointScores;
  crps: CrpsReport;
  alphaIndex: number | null;
  /** Mean PIT (0.5 unbiased) and 12 × PIT variance (1 calibrated, > 1 too narrow, < 1 too wide). */
  pit: { mean: number | null; varianceRatio: number | null };
  intervals: IntervalReport[];
  brier: BrierReport[];
  pitHistogram: { counts: number[]; expected: number };
  /** Coverage-probability (predictive QQ) plot: uniform positions and matching PIT quantiles. */
  qq: { uniform: number[]; pit: number[] };
  spread: SpreadAssessment;
  byLead: LeadReport[];
}

export interface ComparisonReport {
  cases: { given: number; used: number; noObservation: number; outsideLeadRange: number; missingValues: number };
  leadRange: { min: number | null; max: number | null };
  /** How the stochastic stage was given: samples, midpoint quantiles, or not compared. */
  stochasticFrom: 'samples' | 'quantiles' | null;
  settings: { seed: number; levels: number[]; thresholds: number[]; reliabilityBins: number; pitBins: number; qqPoints: number; batches: number };
  raw: SourceReport;
  corrected: SourceReport;
  stochastic: SourceReport | null;
  /** Paired per-case CRPS differences (first minus second); negative = the first is better. */
  crpsDifferences: CrpsDifferences;
  /**
   * The same for the fair CRPS. Standard CRPS favours larger sets of values (its expectation
   * exceeds the fair one by E|X − X'|/(2m)), so 1000 stochastic samples would gain on 50
   * members from their number alone; the fair CRPS compares the forecast distributions. It is
   * for exchangeable members and samples only: a stage given as midpoint quantiles enters with
   * its standard CRPS, which already estimates its distribution's CRPS.
   */
  fairCrpsDifferences: CrpsDifferences;
  sizeStudy: SizeStudyResult[] | null;
}

export interface CrpsDifferences {
  correctedVsRaw: PairedDifference;
  stochasticVsCorrected: PairedDifference | null;
  stochasticVsRaw: PairedDifference | null;
}

export interface Comparison {
  add(c: VerificationCase): void;
  result(): ComparisonReport;
}

function posInt(v: number, name: string): number {
  if (!Number.isInteger(v) || v < 1) throw new RangeError(`${name} must be a positive integer, got ${v}`);
  return v;
}

export function createComparison(options: CompareOptions = {}): Comparison {
  const seed = options.seed ?? 1;
  if (!Number.isSafeInteger(seed) || seed < 0) throw new RangeError('seed must be a non-negative integer');
  const levels = options.levels ?? [0.5, 0.9, 0.95];
  for (const l of levels) if (!(l > 0 && l < 1)) throw new RangeError(`interval level must be in (0, 1), got ${l}`);
  const thresholds = options.thresholds ?? [];
  for (const t of thresholds) if (!Number.isFinite(t)) throw new RangeError('thresholds must be finite numbers');
  const reliabilityBins = posInt(options.reliabilityBins ?? 10, 'reliabilityBins');
  const pitBins = posInt(options.pitBins ?? 10, 'pitBins');
  const qqPoints = posInt(options.qqPoints ?? 100, 'qqPoints');
  const batches = options.batches ?? 20;
  if (!Number.isInteger(batches) || batches < 2) throw new RangeError('batches must be an integer ≥ 2');
  const minLead = options.leadRange?.min ?? -Infinity;
  const maxLead = options.leadRange?.max ?? Infinity;

  const obs = new GrowableF64();
  const leads = new GrowableF64();
  const counts = { given: 0, used: 0, noObservation: 0, outsideLeadRange: 0, missingValues: 0 };
  let names: SourceName[] | null = null;
  let stochasticFrom: ComparisonReport['stochasticFrom'] = null;
  let accs: SourceAccumulator[] = [];
  let studies: SizeStudyAccumulator[] = [];

  function start(c: VerificationCase): void {
    const withStochastic = options.includeStochastic ?? Boolean(c.stochastic || c.stochasticQuantiles);
    names = withStochastic ? [...SOURCE_NAMES] : ['raw', 'corrected'];
    accs = names.map((_, i) => new SourceAccumulator(levels, thresholds, createPrng(seed, 1 + i)));
    const study = options.sizeStudy;
    if (study) {
      const src = study.sources ?? ['corrected'];
      for (const s of src) if (!names.includes(s)) throw new RangeError(`size study source ${s} is not compared`);
      studies = src.map((s, i) => new SizeStudyAccumulator(s, study, 100 + i));
    }
  }

  function add(c: VerificationCase): void {
    counts.given++;
    if (names === null) start(c);
    const y = c.observation;
    if (y === null || !Number.isFinite(y)) {
      counts.noObservation++;
      return;
    }
    if (!(c.lead >= minLead && c.lead <= maxLead)) {
      counts.outsideLeadRange++;
      return;
    }
    for (let i = 0; i < accs.length; i++) {
      const v = sourceValues(c, names![i]);
      if (!v || accs[i].load(v) === 0) {
        counts.missingValues++;
        return;
      }
    }
    if (accs.length === 3 && stochasticFrom === null) stochasticFrom = c.stochastic ? 'samples' : 'quantiles';
    counts.used++;
    obs.push(y);
    leads.push(c.lead);
    for (let i = 0; i < accs.length; i++) {
      const sorted = accs[i].commit(y, names![i] === 'stochastic' && !c.stochastic);
      for (const st of studies) if (st.source === names![i]) st.add(sorted, sorted.length, y);
    }
  }

  function result(): ComparisonReport {
    const o = obs.view();
    const ld = leads.view();
    const reports = accs.map((a, i) =>
      sourceReport(names![i], a, o, ld, { reliabilityBins, pitBins, qqPoints, spread: options.spread ?? {} }),
    );
    const rawCrps = reports[0]?.crps.crps ?? null;
    const rawFair = reports[0]?.crps.fairCrps ?? null;
    for (const r of reports) {
      r.crps.skillVsRaw = rawCrps !== null && rawCrps > 0 && r.crps.crps !== null ? jsonNumber(1 - r.crps.crps / rawCrps) : null;
      r.crps.fairSkillVsRaw = rawFair !== null && rawFair > 0 && r.crps.fairCrps !== null ? jsonNumber(1 - r.crps.fairCrps / rawFair) : null;
    }
    const has3 = accs.length === 3;
    const diffs = (fair: boolean): CrpsDifferences => {
      const of = (i: number) => (accs.length > i ? (fair ? accs[i].fairCrps : accs[i].crps).view() : new Float64Array(0));
      return {
        correctedVsRaw: pairedDifference(of(1), of(0), batches),
        stochasticVsCorrected: has3 ? pairedDifference(of(2), of(1), batches) : null,
        stochasticVsRaw: has3 ? pairedDifference(of(2), of(0), batches) : null,
      };
    };
    return {
      cases: { ...counts },
      leadRange: { min: Number.isFinite(minLead) ? minLead : null, max: Number.isFinite(maxLead) ? maxLead : null },
      stochasticFrom: has3 ? stochasticFrom : null,
      settings: { seed, levels: [...levels], thresholds: [...thresholds], reliabilityBins, pitBins, qqPoints, batches },
      raw: reports[0] ?? emptyReport('raw'),
      corrected: reports[1] ?? emptyReport('corrected'),
      stochastic: has3 ? reports[2] : null,
      crpsDifferences: diffs(false),
      fairCrpsDifferences: diffs(true),
      sizeStudy: options.sizeStudy ? studies.map((s) => s.result()) : null,
    };
  }

  return { add, result };
}

/** All cases at once; see createComparison for streaming. */
export function compareForecasts(cases: Iterable<VerificationCase>, options: CompareOptions = {}): ComparisonReport {
  const c = createComparison(options);
  for (const x of cases) c.add(x);
  return c.result();
}

function pointScores(sim: Float64Array, obs: Float64Array): PointScores {
  const d = deterministicScores(sim, obs);
  return {
    n: d.n,
    mae: jsonNumber(d.mae),
    rmse: jsonNumber(d.rmse),
    bias: jsonNumber(d.bias),
    percentBias: jsonNumber(d.percentBias),
    nse: jsonNumber(d.nse),
    kge: jsonNumber(d.kge),
    kgePrime: jsonNumber(d.kgePrime),
    r: jsonNumber(d.r),
    variabilityRatio: jsonNumber(d.alpha),
    biasRatio: jsonNumber(d.beta),
  };
}

function meanFinite(x: ArrayLike<number>): number {
  let s = 0;
  let n = 0;
  for (let i = 0; i < x.length; i++) {
    if (Number.isNaN(x[i])) continue;
    s += x[i];
    n++;
  }
  return n ? s / n : NaN;
}

function brierReport(threshold: number, exact: BrierResult, diagram: BrierResult): BrierReport {
  const b = diagram.bins;
  return {
    threshold,
    n: exact.n,
    brier: jsonNumber(exact.brier),
    reliability: jsonNumber(exact.reliability),
    resolution: jsonNumber(exact.resolution),
    uncertainty: jsonNumber(exact.uncertainty),
    baseRate: jsonNumber(exact.baseRate),
    skill: exact.uncertainty > 0 ? jsonNumber(1 - exact.brier / exact.uncertainty) : null,
    diagram: Array.from(b.count, (count, k) => ({
      lower: b.lower[k],
      upper: b.upper[k],
      count,
      meanForecast: jsonNumber(b.meanForecast[k]),
      observedFrequency: jsonNumber(b.observedFrequency[k]),
    })),
  };
}

/** QQ data: every point for small samples, else PIT quantiles at t/(K + 1), t = 1 … K. */
function qqData(pit: Float64Array, maxPoints: number): { uniform: number[]; pit: number[] } {
  const sorted = finiteSorted(pit);
  const n = sorted.length;
  const K = Math.min(n, maxPoints);
  const uniform: number[] = [];
  const q: number[] = [];
  for (let t = 1; t <= K; t++) {
    uniform.push(t / (K + 1));
    q.push(K === n ? sorted[t - 1] : quantileSorted(sorted, t / (K + 1)));
  }
  return { uniform, pit: q };
}

function byLeadReport(a: SourceAccumulator, leads: Float64Array, obs: Float64Array): LeadReport[] {
  const groups = new Map<number, number[]>();
  for (let i = 0; i < leads.length; i++) {
    const g = groups.get(leads[i]);
    if (g) g.push(i);
    else groups.set(leads[i], [i]);
  }
  const crps = a.crps.view();
  const pit = a.pit.view();
  const med = a.median.view();
  return [...groups.keys()]
    .sort((x, y) => x - y)
    .map((lead) => {
      const idx = groups.get(lead)!;
      const p = Float64Array.from(idx, (i) => pit[i]);
      let c = 0;
      let e = 0;
      for (const i of idx) {
        c += crps[i];
        e += Math.abs(med[i] - obs[i]);
      }
      return {
        lead,
        n: idx.length,
        crps: jsonNumber(c / idx.length),
        alphaIndex: jsonNumber(alphaIndex(p)),
        pitCoverage90: jsonNumber(pitCoverage(p, 0.9).coverage),
        maeMedian: jsonNumber(e / idx.length),
      };
    });
}

function sourceReport(
  source: SourceName,
  a: SourceAccumulator,
  obs: Float64Array,
  leads: Float64Array,
  o: { reliabilityBins: number; pitBins: number; qqPoints: number; spread: SpreadOptions },
): SourceReport {
  const n = a.n;
  const pit = a.pit.view();
  const h = a.hersbach && a.hersbach.n > 0 ? a.hersbach.result() : null;
  const pitMean = meanFinite(pit);
  let v = 0;
  for (let i = 0; i < n; i++) v += (pit[i] - pitMean) ** 2;
  const outcome = new Uint8Array(n);
  const brier = a.thresholds.map((thr, t) => {
    for (let i = 0; i < n; i++) outcome[i] = obs[i] > thr ? 1 : 0;
    const prob = a.probAbove[t].view();
    return brierReport(thr, brierDecomposition(prob, outcome, a.maxMembers + 1), brierDecomposition(prob, outcome, o.reliabilityBins));
  });
  return {
    source,
    n,
    members: { min: n ? a.minMembers : 0, max: a.maxMembers },
    median: pointScores(a.median.view(), obs),
    mean: pointScores(a.mean.view(), obs),
    crps: {
      crps: jsonNumber(meanFinite(a.crps.view())),
      fairCrps: jsonNumber(meanFinite(a.fairCrps.view())),
      skillVsRaw: null,
      fairSkillVsRaw: null,
      hersbach: {
        n: h ? h.n : 0,
        skipped: a.hersbachSkipped,
        crps: h ? jsonNumber(h.crps) : null,
        reliability: h ? jsonNumber(h.reliability) : null,
        potential: h ? jsonNumber(h.potential) : null,
        uncertainty: h ? jsonNumber(h.uncertainty) : null,
        resolution: h ? jsonNumber(h.resolution) : null,
      },
    },
    alphaIndex: jsonNumber(alphaIndex(pit)),
    pit: { mean: jsonNumber(pitMean), varianceRatio: jsonNumber(n ? (12 * v) / n : NaN) },
    intervals: a.levels.map((level, l) => ({
      level,
      coverage: jsonNumber(a.coveredCount[l] / n),
      pitCoverage: jsonNumber(pitCoverage(pit, level).coverage),
      meanWidth: jsonNumber(a.widthSum[l] / n),
    })),
    brier,
    pitHistogram: { counts: Array.from(rankHistogram(pit, o.pitBins)), expected: n / o.pitBins },
    qq: qqData(pit, o.qqPoints),
    spread: classifySpread(pit, o.spread),
    byLead: byLeadReport(a, leads, obs),
  };
}

function emptyReport(source: SourceName): SourceReport {
  const p: PointScores = { n: 0, mae: null, rmse: null, bias: null, percentBias: null, nse: null, kge: null, kgePrime: null, r: null, variabilityRatio: null, biasRatio: null };
  return {
    source,
    n: 0,
    members: { min: 0, max: 0 },
    median: p,
    mean: { ...p },
    crps: { crps: null, fairCrps: null, skillVsRaw: null, fairSkillVsRaw: null, hersbach: { n: 0, skipped: 0, crps: null, reliability: null, potential: null, uncertainty: null, resolution: null } },
    alphaIndex: null,
    pit: { mean: null, varianceRatio: null },
    intervals: [],
    brier: [],
    pitHistogram: { counts: [], expected: 0 },
    qq: { uniform: [], pit: [] },
    spread: classifySpread([]),
    byLead: [],
  };
}

