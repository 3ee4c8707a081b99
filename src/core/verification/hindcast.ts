import type { ErrorArchive } from '../stochastic/error-archive.ts';
import {
  createStochasticWorkspace,
  runStochasticStage,
  type StochasticOptions,
  type StochasticResult,
  type StochasticWorkspace,
} from '../stochastic/stochastic-stage.ts';
import type { VerificationCase } from './case.ts';

/**
 * Hindcast in reforecast form: for each past issue, raw members → correction → stochastic
 * stage, then one verification case per lead time with an observation. Pure: the correction is
 * passed in (the residual model in production, anything in tests), and every random draw comes
 * from the stage's seed (issue i uses seed + i, so one issue can be re-run alone).
 */
export interface HindcastInput {
  nIssues: number;
  nMembers: number;
  nLeads: number;
  /** Raw members, [(issue·nMembers + member)·nLeads + lead] (m³/s). */
  raw: ArrayLike<number>;
  /** Observed flow at each lead's valid time, [issue·nLeads + lead]; null/NaN = not observed. */
  observed: ArrayLike<number | null>;
  /** Valid-time day of year (1 … 366), [issue·nLeads + lead]; needed for seasonal windows. */
  dayOfYear?: ArrayLike<number>;
  /** Issue times (RFC 3339), copied into the cases; optional. */
  issueTimes?: readonly string[];
  /**
   * Writes the corrected members of one issue into `out` (same layout as `raw`: member·nLeads +
   * lead). `raw` and `out` are reused between issues.
   */
  correct: (raw: Float64Array, issue: number, out: Float64Array) => void;
  /**
   * The issue-time error of each (model, member) of one issue, called after `correct` (for
   * archives split into issue-error strata); undefined or absent = not known.
   */
  issueError?: (issue: number) => ArrayLike<number> | undefined;
  /**
   * Residual models bundled (default 1). `correct` then writes nModels·nMembers·nLeads values,
   * model-major ([(model·nMembers + member)·nLeads + lead]); the corrected ensemble is the mean
   * over models per member and the stochastic stage runs on every (model, member), as serving
   * does (src/models/correct-run.ts).
   */
  nModels?: number;
  /** Error archive of the corrected members; null = no stochastic stage. */
  archive: ErrorArchive | null;
  /** Stage settings; `seed` is the seed of issue 0. Trajectories are always kept. */
  stochastic?: Omit<StochasticOptions, 'keepTrajectories'>;
  /**
   * Called once per issue, every lead time included (observed or not), after the stage: the raw
   * and corrected members (arrays reused between issues) and the stage's result (null without
   * archive). For keeping each issue's output.
   */
  onIssue?: (issue: number, out: { raw: Float64Array; corrected: Float64Array; stage: StochasticResult | null }) => void;
}

export interface HindcastSummary {
  issues: number;
  /** Cases handed on (observation present). */
  cases: number;
  /** Cases without observation (not handed on). */
  unobserved: number;
}

/**
 * Runs the hindcast and hands each case to `onCase`. The arrays inside a case are reused for
 * the next case: copy them to keep them (hindcastCases does).
 */
export function runHindcast(
  input: HindcastInput,
  onCase: (c: VerificationCase, issue: number) => void,
  workspace: StochasticWorkspace = createStochasticWorkspace(),
): HindcastSummary {
  const { nIssues, nMembers: M, nLeads: H, raw, observed, archive } = input;
  const K = input.nModels ?? 1;
  for (const [v, name] of [[nIssues, 'nIssues'], [M, 'nMembers'], [H, 'nLeads'], [K, 'nModels']] as const) {
    if (!Number.isInteger(v) || v < 1) throw new RangeError(`${name} must be a positive integer`);
  }
  if (raw.length !== nIssues * M * H) throw new RangeError('raw must hold nIssues × nMembers × nLeads values');
  if (observed.length !== nIssues * H) throw new RangeError('observed must hold nIssues × nLeads values');
  if (input.dayOfYear && input.dayOfYear.length !== nIssues * H) throw new RangeError('dayOfYear must hold nIssues × nLeads values');
  const opts = input.stochastic ?? { seed: 1 };
  if (archive && !(Number.isSafeInteger(opts.seed) && opts.seed >= 0 && Number.isSafeInteger(opts.seed + nIssues))) {
    throw new RangeError('stochastic.seed must be a non-negative integer');
  }
  const N = opts.nDraws ?? 1000;
  const rawIssue = new Float64Array(M * H);
  const corrIssue = new Float64Array(K * M * H);
  const doyIssue = new Float64Array(H);
  const rawCol = new Float64Array(M);
  const corrCol = new Float64Array(M);
  const stochCol = new Float64Array(N);
  const c: VerificationCase = { lead: 0, observation: null, raw: rawCol, corrected: corrCol, stochastic: archive ? stochCol : null };
  let cases = 0;
  let unobserved = 0;
  for (let is = 0; is < nIssues; is++) {
    const base = is * M * H;
    for (let i = 0; i < M * H; i++) rawIssue[i] = raw[base + i];
    input.correct(rawIssue, is, corrIssue);
    let traj: Float64Array | null = null;
    let stage: StochasticResult | null = null;
    if (archive) {
      if (input.dayOfYear) for (let h = 0; h < H; h++) doyIssue[h] = input.dayOfYear[is * H + h];
      const r = runStochasticStage(
        archive,
        { members: corrIssue, nModels: K, nMembers: M, nLeads: H, dayOfYear: input.dayOfYear ? doyIssue : undefined, issueError: input.issueError?.(is) },
        { ...opts, seed: opts.seed + is, keepTrajectories: true },
        workspace,
      );
      traj = r.trajectories!;
      stage = r;
    }
    input.onIssue?.(is, { raw: rawIssue, corrected: corrIssue, stage });
    if (input.issueTimes) c.issueTime = input.issueTimes[is];
    for (let h = 0; h < H; h++) {
      const y = observed[is * H + h];
      if (y === null || !Number.isFinite(y)) {
        unobserved++;
        continue;
      }
      for (let m = 0; m < M; m++) {
        rawCol[m] = rawIssue[m * H + h];
        let s = 0;
        for (let k = 0; k < K; k++) s += corrIssue[(k * M + m) * H + h];
        corrCol[m] = K === 1 ? s : s / K;
      }
      if (traj) for (let j = 0; j < N; j++) stochCol[j] = traj[j * H + h];
      c.lead = h;
      c.observation = y;
      onCase(c, is);
      cases++;
    }
  }
  return { issues: nIssues, cases, unobserved };
}

/** The hindcast's cases as independent objects (for small runs; long runs should stream). */
export function hindcastCases(input: HindcastInput, workspace?: StochasticWorkspace): VerificationCase[] {
  const out: VerificationCase[] = [];
  runHindcast(
    input,
    (c) => {
      out.push({
        lead: c.lead,
        observation: c.observation,
        raw: Float64Array.from(c.raw as ArrayLike<number>),
        corrected: Float64Array.from(c.corrected as ArrayLike<number>),
        stochastic: c.stochastic ? Float64Array.from(c.stochastic as ArrayLike<number>) : null,
        ...(c.issueTime !== undefined ? { issueTime: c.issueTime } : {}),
      });
    },
    workspace,
  );
  return out;
}
