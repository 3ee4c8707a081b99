// What an uploaded ONNX model must declare for its feature spec, and the predictor that feeds it,
// for both kinds of spec: flat rows [N, nFeatures] (trees, MLPs) and windows
// [N, window, steps] (the usual PyTorch LSTM/GRU export).
import type { InferenceSession } from 'onnxruntime-node';
import { inputWidth, isSequenceSpec, rowShape, type ResidualSpec } from '../core/features/model-inputs.ts';
import type { OnnxSummary } from './onnx-inspect.ts';
import { predictResiduals } from './onnx-session.ts';
import type { ResidualPredictor } from './residual-evaluation.ts';

export interface ShapeProblem {
  path: string;
  message: string;
}

const fmt = (dims: (number | string | null)[]) => `[${dims.map((d) => d ?? '?').join(', ')}]`;

/**
 * The model must take exactly one float input shaped [N, …rowShape(spec)] (fixed sizes must
 * match; symbolic ones are accepted) and give one residual per row: float [N, 1] or [N].
 */
export function modelShapeProblems(spec: ResidualSpec, summary: OnnxSummary, path = 'body.onnxBase64'): ShapeProblem[] {
  const errors: ShapeProblem[] = [];
  const want = rowShape(spec);
  const what = isSequenceSpec(spec) ? `the feature spec's ${spec.window}-step window of ${spec.steps.length} per-step features` : `the feature spec's ${want[0]} features`;
  const input = summary.inputs[0];
  if (summary.inputs.length !== 1) errors.push({ path, message: `the model must take exactly one input, it takes ${summary.inputs.length}` });
  else {
    const fits = input.elemType === 'float' && input.dims.length === want.length + 1 && want.every((w, i) => typeof input.dims[i + 1] !== 'number' || input.dims[i + 1] === w);
    if (!fits) errors.push({ path, message: `input ${input.name} must be float [N, ${want.join(', ')}] (${what}); it is ${input.elemType} ${fmt(input.dims)}` });
  }
  const output = summary.outputs[0];
  if (summary.outputs.length < 1) errors.push({ path, message: 'the model has no output' });
  else if (output.elemType !== 'float' || output.dims.length > 2 || (output.dims.length === 2 && typeof output.dims[1] === 'number' && output.dims[1] !== 1)) {
    errors.push({ path, message: `output ${output.name} must be float [N, 1] or [N] (one residual per row); it is ${output.elemType} ${fmt(output.dims)}` });
  }
  return errors;
}

/** A predictor that hands rows to the session in the tensor shape the spec's model takes. */
export function predictorFor(session: InferenceSession, spec: ResidualSpec): ResidualPredictor {
  const shape = rowShape(spec);
  return (rows, n, nF) => predictResiduals(session, rows, n, nF, shape);
}

/** One all-zero row, to warm a session before its first real run. */
export async function warmSession(session: InferenceSession, spec: ResidualSpec): Promise<void> {
  const width = inputWidth(spec);
  await predictResiduals(session, new Float32Array(width), 1, width, rowShape(spec));
}
