// The feature spec stored with every model version: plain JSON, enough to rebuild the exact
// feature rows a model was trained on (training and serving both read it).

export interface ForcingLags {
  /** Forcing name as it appears in the inputs, e.g. "precipitation", "air_temperature". */
  name: string;
  /** Lags 0..lags are used: lag 0 is the value at the row's valid time t. */
  lags: number;
}

export interface FeatureSpec {
  version: 1;
  /** Time step of every series, in seconds (86400 for daily). */
  stepSeconds: number;
  /** Simulated flow of the member at t, t-1, …, t-simLags (simLags + 1 columns). */
  simLags: number;
  forcings: ForcingLags[];
  /** Day-of-year sine and cosine of the valid time. */
  seasonal: boolean;
  /** Lead time in hours as a feature (meant for models trained on reforecast archives). */
  leadTime: boolean;
  /** Observed − simulated at issue time (the last known error). */
  issueError: boolean;
}

/** Thrown when inputs (or a spec) do not fit; `path` names the field, e.g. `members[3].values`. */
export class FeatureInputError extends Error {
  readonly path: string;
  constructor(path: string, message: string) {
    super(`${path}: ${message}`);
    this.name = 'FeatureInputError';
    this.path = path;
  }
}

const MAX_LAGS = 1000; // far beyond any sensible window; guards against absurd allocations

/** Defaults: 9 sim lags (chosen for daily steps), seasonal on, lead time and issue error off. */
export function makeFeatureSpec(
  options: { stepSeconds: number } & Partial<Omit<FeatureSpec, 'version' | 'stepSeconds'>>,
): FeatureSpec {
  return checkFeatureSpec({
    version: 1,
    stepSeconds: options.stepSeconds,
    simLags: options.simLags ?? 9,
    forcings: (options.forcings ?? []).map((f) => ({ name: f.name, lags: f.lags })),
    seasonal: options.seasonal ?? true,
    leadTime: options.leadTime ?? false,
    issueError: options.issueError ?? false,
  });
}

function lagCount(value: unknown, path: string): number {
  if (typeof value !== 'number' || !Number.isInteger(value) || value < 0 || value > MAX_LAGS) {
    throw new FeatureInputError(path, `must be an integer from 0 to ${MAX_LAGS}`);
  }
  return value;
}

function flag(value: unknown, path: string): boolean {
  if (typeof value !== 'boolean') throw new FeatureInputError(path, 'must be true or false');
  return value;
}

/** Validates an untrusted spec (e.g. read back from storage) and returns a clean copy. */
export function checkFeatureSpec(value: unknown): FeatureSpec {
  if (typeof value !== 'object' || value === null) throw new FeatureInputError('spec', 'must be an object');
  const v = value as Record<string, unknown>;
  if (v.version !== 1) throw new FeatureInputError('spec.version', 'must be 1');
  const step = v.stepSeconds;
  if (typeof step !== 'number' || !Number.isInteger(step) || step <= 0) {
    throw new FeatureInputError('spec.stepSeconds', 'must be a positive integer');
  }
  if (!Array.isArray(v.forcings)) throw new FeatureInputError('spec.forcings', 'must be an array');
  const forcings = v.forcings.map((f: unknown, i: number): ForcingLags => {
    const path = `spec.forcings[${i}]`;
    if (typeof f !== 'object' || f === null) throw new FeatureInputError(path, 'must be an object');
    const { name, lags } = f as Record<string, unknown>;
    if (typeof name !== 'string' || !/^[A-Za-z][A-Za-z0-9_]*$/.test(name)) {
      throw new FeatureInputError(`${path}.name`, 'must be a name of letters, digits and _');
    }
    return { name, lags: lagCount(lags, `${path}.lags`) };
  });
  const spec: FeatureSpec = {
    version: 1,
    stepSeconds: step,
    simLags: lagCount(v.simLags, 'spec.simLags'),
    forcings,
    seasonal: flag(v.seasonal, 'spec.seasonal'),
    leadTime: flag(v.leadTime, 'spec.leadTime'),
    issueError: flag(v.issueError, 'spec.issueError'),
  };
  const names = featureNames(spec);
  const seen = new Set<string>();
  for (const n of names) {
    if (seen.has(n)) throw new FeatureInputError('spec.forcings', `feature name "${n}" occurs twice`);
    seen.add(n);
  }
  return spec;
}

/**
 * Column names in row order: sim_lag0..sim_lagL, then per forcing (spec order)
 * <name>_lag0..<name>_lagF, then day_of_year_sin, day_of_year_cos, lead_hours, issue_error
 * (each only when enabled).
 */
export function featureNames(spec: FeatureSpec): string[] {
  const names: string[] = [];
  for (let j = 0; j <= spec.simLags; j++) names.push(`sim_lag${j}`);
  for (const f of spec.forcings) for (let j = 0; j <= f.lags; j++) names.push(`${f.name}_lag${j}`);
  if (spec.seasonal) names.push('day_of_year_sin', 'day_of_year_cos');
  if (spec.leadTime) names.push('lead_hours');
  if (spec.issueError) names.push('issue_error');
  return names;
}

export function featureCount(spec: FeatureSpec): number {
  let n = spec.simLags + 1;
  for (const f of spec.forcings) n += f.lags + 1;
  return n + (spec.seasonal ? 2 : 0) + (spec.leadTime ? 1 : 0) + (spec.issueError ? 1 : 0);
}

export interface RequiredInputs {
  stepSeconds: number;
  /**
   * Values of each member needed at or before issue time (times issue−(n−1)·step … issue),
   * in addition to one value per lead time.
   */
  simStepsToIssue: number;
  /** Per forcing: values needed at or before issue time, in addition to one per lead time. */
  forcings: { name: string; stepsToIssue: number }[];
  /** Whether the observation at issue time is needed. */
  issueObservation: boolean;
  /** Continuous training: the first row that can be built is at this time index. */
  firstContinuousIndex: number;
}

export function requiredInputs(spec: FeatureSpec): RequiredInputs {
  // Lead 1 with lag L reads t0 + 1 − L, i.e. L values up to and including issue time; the
  // issue error also reads the simulated value at issue time.
  const simSteps = Math.max(spec.simLags, spec.issueError ? 1 : 0);
  let first = simSteps;
  for (const f of spec.forcings) first = Math.max(first, f.lags);
  return {
    stepSeconds: spec.stepSeconds,
    simStepsToIssue: simSteps,
    forcings: spec.forcings.map((f) => ({ name: f.name, stepsToIssue: f.lags })),
    issueObservation: spec.issueError,
    firstContinuousIndex: first,
  };
}
