// The input spec of a sequence residual model (an LSTM, GRU, …): the model takes windows
// [N, window, steps.length] — N rows, `window` time steps oldest first, the last step at the
// row's valid time — of the per-step features named in `steps`. Stored with the model version
// like the flat FeatureSpec, and read by training and serving alike.
import { FeatureInputError } from './feature-spec.ts';

/** What a per-step value is before it is scaled: log1p for flows spread over orders of magnitude. */
export type StepTransform = 'none' | 'log1p';

export interface StepFeature {
  /**
   * "sim" (the member's simulated flow, m³/s), "day_of_year_sin" / "day_of_year_cos" (of the
   * step's time), or the name of a forcing ("precipitation", "air_temperature", …).
   */
  name: string;
  transform: StepTransform;
  /** The value fed to the model is (transform(x) − center) / scale. */
  center: number;
  scale: number;
}

export interface SequenceSpec {
  version: 1;
  kind: 'sequence';
  /** Time step of every series, in seconds. */
  stepSeconds: number;
  /** Steps per window (T): the row's valid time and the window − 1 steps before it. */
  window: number;
  steps: StepFeature[];
}

export const SEASON_STEPS = ['day_of_year_sin', 'day_of_year_cos'] as const;
const MAX_WINDOW = 1000; // far beyond any sensible window; guards against absurd allocations
const MAX_STEP_FEATURES = 64;

export function isSequenceSpec(value: unknown): value is SequenceSpec {
  return typeof value === 'object' && value !== null && (value as { kind?: unknown }).kind === 'sequence';
}

/** Validates an untrusted sequence spec (an upload, or one read back from storage); returns a clean copy. */
export function checkSequenceSpec(value: unknown): SequenceSpec {
  if (typeof value !== 'object' || value === null) throw new FeatureInputError('spec', 'must be an object');
  const v = value as Record<string, unknown>;
  for (const key of Object.keys(v)) {
    if (!['version', 'kind', 'stepSeconds', 'window', 'steps'].includes(key)) throw new FeatureInputError(`spec.${key}`, 'is not a field of a sequence spec (version, kind, stepSeconds, window, steps)');
  }
  if (v.version !== 1) throw new FeatureInputError('spec.version', 'must be 1');
  if (v.kind !== 'sequence') throw new FeatureInputError('spec.kind', 'must be "sequence"');
  const step = v.stepSeconds;
  if (typeof step !== 'number' || !Number.isInteger(step) || step <= 0) throw new FeatureInputError('spec.stepSeconds', 'must be a positive integer');
  const window = v.window;
  if (typeof window !== 'number' || !Number.isInteger(window) || window < 1 || window > MAX_WINDOW) {
    throw new FeatureInputError('spec.window', `must be an integer from 1 to ${MAX_WINDOW}`);
  }
  if (!Array.isArray(v.steps) || v.steps.length === 0 || v.steps.length > MAX_STEP_FEATURES) {
    throw new FeatureInputError('spec.steps', `must be a list of 1 to ${MAX_STEP_FEATURES} per-step features`);
  }
  const seen = new Set<string>();
  const steps = v.steps.map((s: unknown, i: number): StepFeature => {
    const path = `spec.steps[${i}]`;
    if (typeof s !== 'object' || s === null) throw new FeatureInputError(path, 'must be an object');
    const { name, transform = 'none', center = 0, scale = 1, ...rest } = s as Record<string, unknown>;
    const extra = Object.keys(rest)[0];
    if (extra !== undefined) throw new FeatureInputError(`${path}.${extra}`, 'is not a field of a step feature (name, transform, center, scale)');
    if (typeof name !== 'string' || !/^[A-Za-z][A-Za-z0-9_]*$/.test(name)) throw new FeatureInputError(`${path}.name`, 'must be a name of letters, digits and _');
    if (seen.has(name)) throw new FeatureInputError(`${path}.name`, `"${name}" occurs twice`);
    seen.add(name);
    if (transform !== 'none' && transform !== 'log1p') throw new FeatureInputError(`${path}.transform`, 'must be "none" or "log1p"');
    if (typeof center !== 'number' || !Number.isFinite(center)) throw new FeatureInputError(`${path}.center`, 'must be a finite number');
    if (typeof scale !== 'number' || !Number.isFinite(scale) || scale <= 0) throw new FeatureInputError(`${path}.scale`, 'must be a positive number');
    return { name, transform, center, scale };
  });
  return { version: 1, kind: 'sequence', stepSeconds: step, window, steps };
}

/** Names of the forcings the spec reads (steps that are neither sim nor season), in step order. */
export function sequenceForcings(spec: SequenceSpec): string[] {
  return spec.steps.map((s) => s.name).filter((n) => n !== 'sim' && !(SEASON_STEPS as readonly string[]).includes(n));
}

/** Values of one row: window × steps. */
export function sequenceWidth(spec: SequenceSpec): number {
  return spec.window * spec.steps.length;
}
