import { archiveToBytes } from '../core/stochastic/archive-codec.ts';
import { correctedMember } from '../core/correction/corrected-member.ts';
import { dayOfYearUtc } from '../core/day-of-year.ts';
import { deterministicScores } from '../core/scores/deterministic-scores.ts';
import { buildArchiveFromSeries, templateShortfall, type ErrorArchive, type NeighbourSettings } from '../core/stochastic/error-archive.ts';
import { pathCount } from '../core/stochastic/forcing-paths.ts';
import { simulationErrorVariances } from '../core/stochastic/lead-growth.ts';
import { chooseNeighboursByHalves, type NeighbourScore } from '../core/stochastic/neighbour-choice.ts';
import type { ErrorTransformSpec } from '../core/stochastic/error-transform.ts';
import { continuousInputs, type ResidualSpec } from '../core/features/model-inputs.ts';
import type { ArchiveSeries, Period } from '../core/archive-types.ts';

/** Predicts residuals for row-major float32 feature rows (one function per bundled model). */
export type ResidualPredictor = (rows: Float32Array, nRows: number, nFeatures: number) => Promise<Float32Array>;

export interface ArchiveOptions {
  transform: ErrorTransformSpec;
  /** Longest horizon (in steps) the archive's Schaake templates can cover. */
  templateLength: number;
}

export interface ValidationScores {
  period: { from: string; to: string };
  members: number;
  cases: number;
  residualRmse: { before: number; after: number };
  /** Mean over members of each member's score, before and after correction. */
  memberMean: { nseBefore: number; nseAfter: number; kgeBefore: number; kgeAfter: number };
  /** Scores of the ensemble mean, before and after correction. */
  ensembleMean: { nseBefore: number; nseAfter: number; kgeBefore: number; kgeAfter: number };
  /** The stochastic stage's neighbour kernel and k chosen on these errors, with every candidate's scores. */
  neighbours: { chosen: NeighbourSettings; candidates: NeighbourScore[] };
  /** Error variances of the corrected simulations (archive transform space): the baseline errors grow from with lead. */
  errorVariances: { memberErrorVariance: number; meanErrorVariance: number };
  /** Per lead, the factor the lead-free archive's errors are scaled by (from past runs); absent without them. */
  leadGrowth?: number[];
}

export interface Evaluation {
  scores: ValidationScores;
  correctedArchive: ErrorArchive;
  rawArchive: ErrorArchive;
}

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');

/**
 * Applies the residual model(s) to every member over the validation period, scores the members
 * before and after correction, and builds the two error archives of the stochastic stage: the
 * corrected members' errors (the normal case) and the raw members' errors (degraded mode).
 * A bundle's corrected value is the mean of its models' corrections. Corrected flow is never
 * negative.
 */
export async function evaluateResidualModel(
  series: ArchiveSeries,
  spec: ResidualSpec,
  validation: Period,
  predictors: ResidualPredictor[],
  options: ArchiveOptions,
): Promise<Evaluation> {
  const { times, observed } = series;
  const inPeriod: number[] = [];
  for (let i = 0; i < times.length; i++) if (times[i] >= validation.fromMs && times[i] < validation.toMs) inPeriod.push(i);
  if (inPeriod.length < options.templateLength + 1) {
    throw new Error(`the validation period holds ${inPeriod.length} steps; at least ${options.templateLength + 1} are needed`);
  }
  const first = inPeriod[0];
  const len = inPeriod.length;
  const nM = series.members.length;
  // Member series laid end to end, each followed by one gap so no template window crosses members.
  const stride = len + 1;
  const rawCat = new Float64Array(nM * stride).fill(NaN);
  const corCat = new Float64Array(nM * stride).fill(NaN);
  const obsCat = new Float64Array(nM * stride).fill(NaN);
  const doyCat = new Uint16Array(nM * stride).fill(1);
  const residualSq = { before: 0, after: 0, n: 0 };
  const ensRaw = new Float64Array(len);
  const ensCor = new Float64Array(len);
  const ensCount = new Float64Array(len);
  const memberScores = { nseBefore: 0, nseAfter: 0, kgeBefore: 0, kgeAfter: 0 };

  for (let m = 0; m < nM; m++) {
    const sim = series.members[m].values;
    // Rows at every time with complete inputs: the member itself stands in for the target,
    // which is not used here (an all-missing target would drop every row).
    const all = continuousInputs(spec, { times, sim, forcings: series.forcings, obs: sim });
    // The member's corrected value per time (src/core/correction/corrected-member.ts): each model's clipped
    // value, averaged over a bundle's models.
    const corrected = new Float64Array(times.length).fill(NaN);
    const pick: number[] = [];
    for (let r = 0; r < all.nRows; r++) {
      const t = all.index[r];
      if (times[t] >= validation.fromMs && times[t] < validation.toMs) pick.push(r);
    }
    if (pick.length) {
      const nF = all.nFeatures;
      const x = new Float32Array(pick.length * nF);
      pick.forEach((r, j) => x.set(all.rows.subarray(r * nF, (r + 1) * nF), j * nF));
      const sum = new Float64Array(pick.length);
      for (const predict of predictors) {
        const out = await predict(x, pick.length, nF);
        for (let j = 0; j < pick.length; j++) sum[j] += correctedMember(sim[all.index[pick[j]]], out[j]);
      }
      pick.forEach((r, j) => {
        corrected[all.index[r]] = sum[j] / predictors.length;
      });
    }
    const raw = new Float64Array(len);
    const cor = new Float64Array(len);
    const obs = new Float64Array(len);
    for (let j = 0; j < len; j++) {
      const i = first + j;
      const s = sim[i];
      const c = corrected[i];
      raw[j] = s;
      cor[j] = c;
      obs[j] = observed[i];
      const k = m * stride + j;
      rawCat[k] = s;
      corCat[k] = c;
      obsCat[k] = Number.isNaN(c) ? NaN : observed[i];
      doyCat[k] = dayOfYearUtc(times[i]);
      if (Number.isFinite(c) && Number.isFinite(observed[i]) && Number.isFinite(s)) {
        residualSq.before += (observed[i] - s) ** 2;
        residualSq.after += (observed[i] - c) ** 2;
        residualSq.n++;
        ensRaw[j] += s;
        ensCor[j] += c;
        ensCount[j]++;
      }
    }
    const before = deterministicScores(maskWhere(raw, cor), obs);
    const after = deterministicScores(cor, obs);
    memberScores.nseBefore += before.nse / nM;
    memberScores.nseAfter += after.nse / nM;
    memberScores.kgeBefore += before.kge / nM;
    memberScores.kgeAfter += after.kge / nM;
  }
  const obsWindow = Float64Array.from({ length: len }, (_, j) => (ensCount[j] ? observed[first + j] : NaN));
  for (let j = 0; j < len; j++) {
    ensRaw[j] = ensCount[j] ? ensRaw[j] / ensCount[j] : NaN;
    ensCor[j] = ensCount[j] ? ensCor[j] / ensCount[j] : NaN;
  }
  const ensBefore = deterministicScores(ensRaw, obsWindow);
  const ensAfter = deterministicScores(ensCor, obsWindow);
  if (residualSq.n === 0) throw new Error('no validation case has both a corrected value and an observation');

  // The archive keeps up to ARCHIVE_MEMBERS members, evenly spread: members share the observations,
  // so their errors are near-duplicates, and every extra case slows the neighbour search (k = √n).
  const keep = archiveMembers(nM);
  const pick = (a: Float64Array) => concatMembers(a, keep, stride);
  const archiveInput = { observed: pick(obsCat), dayOfYear: pickDoy(doyCat, keep, stride), transform: options.transform, templateLength: options.templateLength, segmentLength: stride };
  const correctedArchive = buildArchiveFromSeries({ ...archiveInput, corrected: pick(corCat) });
  // A fit whose archive cannot shuffle runs of the horizon it was asked for fails here, with the
  // reason, rather than succeed and have every run refused.
  const shortfall = templateShortfall(correctedArchive, options.templateLength);
  if (shortfall) throw new Error(`the validation period cannot make the error archive: ${shortfall}`);
  const rawArchive = buildArchiveFromSeries({ ...archiveInput, corrected: pick(maskWhere(rawCat, corCat)) });
  // The stage's kernel and k, chosen on these held-out errors (two folds by time) so the PIT is uniform.
  const neighbours = chooseNeighboursByHalves({ corrected: pick(corCat), observed: archiveInput.observed, segmentLength: stride, transform: correctedArchive.transform });
  correctedArchive.neighbours = neighbours.settings;
  rawArchive.neighbours = chooseNeighboursByHalves({ corrected: pick(maskWhere(rawCat, corCat)), observed: archiveInput.observed, segmentLength: stride, transform: rawArchive.transform }).settings;
  return {
    scores: {
      period: { from: iso(validation.fromMs), to: iso(validation.toMs) },
      members: nM,
      cases: residualSq.n,
      residualRmse: { before: Math.sqrt(residualSq.before / residualSq.n), after: Math.sqrt(residualSq.after / residualSq.n) },
      memberMean: memberScores,
      ensembleMean: { nseBefore: ensBefore.nse, nseAfter: ensAfter.nse, kgeBefore: ensBefore.kge, kgeAfter: ensAfter.kge },
      neighbours: { chosen: neighbours.settings, candidates: neighbours.scores },
      errorVariances: simulationErrorVariances({ corrected: corCat, observed: obsCat, nMembers: nM, segmentLength: stride, transform: correctedArchive.transform }),
    },
    correctedArchive,
    rawArchive,
  };
}

export const ARCHIVE_MEMBERS = 8;

/** Indices of up to ARCHIVE_MEMBERS members, evenly spread over nM. */
export function archiveMembers(nM: number): number[] {
  if (nM <= ARCHIVE_MEMBERS) return Array.from({ length: nM }, (_, i) => i);
  return Array.from({ length: ARCHIVE_MEMBERS }, (_, i) => Math.round((i * (nM - 1)) / (ARCHIVE_MEMBERS - 1)));
}

function concatMembers(a: Float64Array, keep: number[], stride: number): Float64Array {
  const out = new Float64Array(keep.length * stride);
  keep.forEach((m, j) => out.set(a.subarray(m * stride, (m + 1) * stride), j * stride));
  return out;
}

function pickDoy(a: Uint16Array, keep: number[], stride: number): Uint16Array {
  const out = new Uint16Array(keep.length * stride);
  keep.forEach((m, j) => out.set(a.subarray(m * stride, (m + 1) * stride), j * stride));
  return out;
}

/** The raw-member archive alone (degraded mode without any model): all steps with an observation. */
export function rawArchiveFromSeries(series: ArchiveSeries, period: Period, options: ArchiveOptions): ErrorArchive {
  const idx: number[] = [];
  for (let i = 0; i < series.times.length; i++) if (series.times[i] >= period.fromMs && series.times[i] < period.toMs) idx.push(i);
  const stride = idx.length + 1;
  const members = archiveMembers(series.members.length).map((m) => series.members[m]);
  const n = members.length * stride;
  const raw = new Float64Array(n).fill(NaN);
  const obs = new Float64Array(n).fill(NaN);
  const doy = new Uint16Array(n).fill(1);
  members.forEach((m, k) => {
    idx.forEach((i, j) => {
      raw[k * stride + j] = m.values[i];
      obs[k * stride + j] = series.observed[i];
      doy[k * stride + j] = dayOfYearUtc(series.times[i]);
    });
  });
  const archive = buildArchiveFromSeries({ corrected: raw, observed: obs, dayOfYear: doy, transform: options.transform, templateLength: options.templateLength, segmentLength: stride });
  const shortfall = templateShortfall(archive, options.templateLength);
  if (shortfall) throw new Error(`the period cannot make the raw error archive: ${shortfall}`);
  archive.neighbours = chooseNeighboursByHalves({ corrected: raw, observed: obs, segmentLength: stride, transform: archive.transform }).settings;
  return archive;
}

export function archiveSummary(a: ErrorArchive): {
  cases: number;
  templates: number;
  templateLength: number;
  transform: unknown;
  neighbours: NeighbourSettings | null;
  leadScale: number[] | null;
  forcingPaths: ForcingPathsSummary | null;
} {
  return {
    cases: a.predictor.length,
    templates: a.templateStart.length,
    templateLength: a.templateLength,
    transform: a.transform,
    neighbours: a.neighbours ?? null,
    leadScale: a.leadScale ? Array.from(a.leadScale) : null,
    forcingPaths: forcingPathsSummary(a),
  };
}

export interface ForcingPathsSummary {
  paths: number;
  leadTimes: number;
  /** Per lead, the mean and standard deviation of the paths (transform space). */
  mean: number[];
  sd: number[];
}

/** What an archive's forecast-forcing paths hold, for the version's summary; null without paths. */
export function forcingPathsSummary(a: ErrorArchive): ForcingPathsSummary | null {
  const p = a.forcingPaths;
  if (!p) return null;
  const P = pathCount(p);
  const mean: number[] = [];
  const sd: number[] = [];
  for (let h = 0; h < p.nLeads; h++) {
    let s = 0;
    let s2 = 0;
    for (let i = 0; i < P; i++) {
      const v = p.values[i * p.nLeads + h];
      s += v;
      s2 += v * v;
    }
    const m = s / P;
    mean.push(m);
    sd.push(P > 1 ? Math.sqrt(Math.max(0, (s2 - P * m * m) / (P - 1))) : 0);
  }
  return { paths: P, leadTimes: p.nLeads, mean, sd };
}

export { archiveToBytes };

/** a where b is finite, else NaN: compares raw and corrected on the same cases. */
function maskWhere(a: Float64Array, b: Float64Array): Float64Array {
  return a.map((v, i) => (Number.isFinite(b[i]) ? v : NaN));
}
