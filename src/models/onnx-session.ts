import * as ort from 'onnxruntime-node';

/**
 * onnxruntime sessions for residual models. One intra-op thread per session: the service runs
 * one session per worker thread, and workers × intra-op threads must not exceed the cores.
 * `session.run` blocks its thread, so callers run this inside worker threads.
 */
export async function createResidualSession(onnx: Uint8Array): Promise<ort.InferenceSession> {
  return ort.InferenceSession.create(onnx, {
    intraOpNumThreads: 1,
    interOpNumThreads: 1,
    executionMode: 'sequential',
    graphOptimizationLevel: 'all',
  });
}

/**
 * Predicts one residual per row; input float32 [nRows, nFeatures], or [nRows, …rowShape] for a
 * sequence model (rowShape [window, steps]; the rows hold window·steps values each).
 */
export async function predictResiduals(
  session: ort.InferenceSession,
  rows: Float32Array,
  nRows: number,
  nFeatures: number,
  rowShape: number[] = [nFeatures],
): Promise<Float32Array> {
  const inputName = session.inputNames[0];
  const outputName = session.outputNames[0];
  const feeds = { [inputName]: new ort.Tensor('float32', rows.subarray(0, nRows * nFeatures), [nRows, ...rowShape]) };
  const out = await session.run(feeds);
  const tensor = out[outputName];
  const data = tensor.data as Float32Array;
  if (data.length !== nRows) throw new Error(`model returned ${data.length} values for ${nRows} rows`);
  tensor.dispose?.();
  return data;
}
