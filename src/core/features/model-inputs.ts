// One entry point for a residual model's inputs, whichever kind of spec the model was stored
// with: flat feature rows [N, nFeatures] (FeatureSpec, trees and MLPs) or windows
// [N, window, steps] (SequenceSpec, LSTMs and GRUs). Window rows are flat in memory
// (window·steps values each), so everything that moves rows around treats both kinds alike;
// only the tensor handed to onnxruntime is shaped by rowShape.
import {
  checkFeatureSpec,
  continuousRows,
  featureCount,
  reforecastRows,
  requiredInputs,
  servingRows,
  type ContinuousInput,
  type ContinuousRows,
  type FeatureSpec,
  type ReforecastIssue,
  type ReforecastRows,
  type RequiredInputs,
  type RunInput,
  type ServingRows,
} from './features.ts';
import { checkSequenceSpec, isSequenceSpec, sequenceForcings, sequenceWidth, type SequenceSpec } from './sequence-spec.ts';
import { continuousWindows, reforecastWindows, sequenceStepsToIssue, servingWindows } from './windows.ts';

export type ResidualSpec = FeatureSpec | SequenceSpec;
export { isSequenceSpec, type SequenceSpec };

/** Validates an untrusted spec of either kind (`kind: "sequence"` marks a window spec). */
export function checkResidualSpec(value: unknown): ResidualSpec {
  return isSequenceSpec(value) ? checkSequenceSpec(value) : checkFeatureSpec(value);
}

/** Values per row (nFeatures, or window × steps). */
export function inputWidth(spec: ResidualSpec): number {
  return isSequenceSpec(spec) ? sequenceWidth(spec) : featureCount(spec);
}

/** The shape of one row in the model's input tensor: [nFeatures] or [window, steps]. */
export function rowShape(spec: ResidualSpec): number[] {
  return isSequenceSpec(spec) ? [spec.window, spec.steps.length] : [featureCount(spec)];
}

/** Forcing names the model reads. */
export function specForcings(spec: ResidualSpec): string[] {
  return isSequenceSpec(spec) ? sequenceForcings(spec) : spec.forcings.map((f) => f.name);
}

export function requiredRunInputs(spec: ResidualSpec): RequiredInputs {
  if (!isSequenceSpec(spec)) return requiredInputs(spec);
  const before = sequenceStepsToIssue(spec);
  const usesSim = spec.steps.some((s) => s.name === 'sim');
  return {
    stepSeconds: spec.stepSeconds,
    simStepsToIssue: usesSim ? before : 0,
    forcings: sequenceForcings(spec).map((name) => ({ name, stepsToIssue: before })),
    issueObservation: false,
    firstContinuousIndex: before,
  };
}

export function continuousInputs(spec: ResidualSpec, input: ContinuousInput): ContinuousRows {
  return isSequenceSpec(spec) ? continuousWindows(spec, input) : continuousRows(spec, input);
}

export function servingInputs(spec: ResidualSpec, run: RunInput, out?: Float32Array): ServingRows {
  return isSequenceSpec(spec) ? servingWindows(spec, run, out) : servingRows(spec, run, out);
}

export function reforecastInputs(spec: ResidualSpec, issues: ReforecastIssue[]): ReforecastRows {
  return isSequenceSpec(spec) ? reforecastWindows(spec, issues) : reforecastRows(spec, issues);
}
