// Hyperparameter tuning by Bayesian optimisation: a seeded Latin hypercube first, then one
// GP / expected-improvement proposal per evaluation. Evaluations run one after the other;
// the same seed and the same objective values give the same trials.
import { createPrng } from '../../core/prng.ts';
import type { GpHyper } from './gp.ts';
import { latinHypercube } from './latin-hypercube.ts';
import { proposeNext } from './propose-next.ts';
import { checkSpace, decodePoint, encodePoint } from './space.ts';
import type { Params, SearchParam } from './space.ts';

export interface Trial {
  /** Evaluation order, from 0. */
  index: number;
  params: Params;
  /** Objective value (lower is better); NaN when the evaluation failed. */
  value: number;
  /** initial design, surrogate proposal, or uniform draw (too few successful trials to fit). */
  source: 'initial' | 'model' | 'random';
  /** EI (standardised units) the proposal had, for model trials. */
  expectedImprovement?: number;
  error?: string;
}

export interface TuneProgress {
  trial: Trial;
  done: number;
  total: number;
  best: Trial | undefined;
}

export interface TuneOptions {
  evaluations?: number;
  initial?: number;
  seed?: number;
  /** How many trials `best` holds (default 5). */
  keepBest?: number;
  onProgress?: (progress: TuneProgress) => void;
  /** Checked before each evaluation; true stops the run (trials so far are returned). */
  shouldStop?: () => boolean;
}

export interface TuneResult {
  /** All trials, best first; failed trials last, in evaluation order. */
  trials: Trial[];
  best: Trial[];
  stopped: boolean;
}

function byValue(a: Trial, b: Trial): number {
  const fa = Number.isFinite(a.value);
  const fb = Number.isFinite(b.value);
  if (fa !== fb) return fa ? -1 : 1;
  return (fa && a.value !== b.value ? a.value - b.value : 0) || a.index - b.index;
}

export async function tune(
  space: SearchParam[],
  objective: (params: Params) => Promise<number> | number,
  options: TuneOptions = {},
): Promise<TuneResult> {
  checkSpace(space);
  const d = space.length;
  const total = options.evaluations ?? 25;
  const nInitial = Math.min(options.initial ?? 8, total);
  if (!(Number.isInteger(total) && total >= 1)) throw new RangeError('evaluations must be a positive integer');
  if (!(Number.isInteger(nInitial) && nInitial >= 1)) throw new RangeError('initial must be a positive integer');
  const seed = options.seed ?? 0;
  const design = latinHypercube(nInitial, d, createPrng(seed, 0));
  const prng = createPrng(seed, 1); // separate stream: surrogate fits and candidates
  const points = new Float64Array(total * d); // unit-cube points actually evaluated
  const trials: Trial[] = [];
  const keys = new Set<string>();
  let warmStart: GpHyper | undefined;
  let best: Trial | undefined;
  let stopped = false;

  for (let i = 0; i < total; i++) {
    if (options.shouldStop?.()) {
      stopped = true;
      break;
    }
    let u: Float64Array;
    let ei: number | undefined;
    let source: Trial['source'] = 'model';
    const ok = trials.filter((t) => Number.isFinite(t.value));
    if (i < nInitial || ok.length < 2) {
      source = i < nInitial ? 'initial' : 'random';
      u = i < nInitial ? design.slice(i * d, (i + 1) * d) : Float64Array.from({ length: d }, () => prng.nextFloat());
    } else {
      // Failed trials count as the worst value seen, steering the search away (common practice).
      const worst = Math.max(...ok.map((t) => t.value));
      const values = trials.map((t) => (Number.isFinite(t.value) ? t.value : worst));
      const proposal = proposeNext(points.subarray(0, i * d), d, values, prng, {
        warmStart,
        isTaken: (c) => keys.has(JSON.stringify(decodePoint(space, c))),
      });
      warmStart = proposal.model.hyper;
      u = proposal.point;
      ei = proposal.expectedImprovement;
    }
    const params = decodePoint(space, u);
    keys.add(JSON.stringify(params));
    encodePoint(space, params, points, i * d); // integers rounded: the surrogate sees what ran
    let value: number;
    let error: string | undefined;
    try {
      value = await objective({ ...params });
      if (typeof value !== 'number' || !Number.isFinite(value)) {
        error = `objective returned ${String(value)}`;
        value = Number.NaN;
      }
    } catch (e) {
      value = Number.NaN;
      error = e instanceof Error ? e.message : String(e);
    }
    const trial: Trial = { index: i, params, value, source };
    if (ei !== undefined) trial.expectedImprovement = ei;
    if (error !== undefined) trial.error = error;
    trials.push(trial);
    if (Number.isFinite(value) && (best === undefined || value < best.value)) best = trial;
    options.onProgress?.({ trial, done: i + 1, total, best });
  }
  const sorted = [...trials].sort(byValue);
  return {
    trials: sorted,
    best: sorted.filter((t) => Number.isFinite(t.value)).slice(0, options.keepBest ?? 5),
    stopped,
  };
}
