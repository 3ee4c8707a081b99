import { readFileSync } from 'node:fs';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';
import { createPrng } from '../../src/core/prng.ts';
import { lstmModelToOnnx } from '../../src/models/lstm-onnx-export.ts';
import { predictLstm } from '../../src/models/lstm/forward.ts';
import type { LstmModel } from '../../src/models/lstm/model.ts';
import { modelToParams, mseGradient, paramLayout, trainLstm } from '../../src/models/lstm/train.ts';
import { inspectOnnx } from '../../src/models/onnx-inspect.ts';

// test/fixtures/torch-lstm/make.py, Debian python3-torch 1.13.0a0 + python3-onnx 1.12.0: an
// nn.LSTM + nn.Linear with seeded weights, its outputs and autograd's gradients.
const dir = new URL('../fixtures/torch-lstm/', import.meta.url);
const ref = JSON.parse(readFileSync(new URL('reference.json', dir), 'utf8')) as {
  versions: Record<string, string>;
  nInputs: number;
  hidden: number;
  window: number;
  rows: number;
  weights: Record<string, number[]>;
  x: number[];
  target: number[];
  output: number[];
  loss: number;
  gradients: Record<string, number[]>;
};

function torchModel(): LstmModel {
  const w = ref.weights;
  return {
    kind: 'lstm',
    nInputs: ref.nInputs,
    hidden: ref.hidden,
    wInput: Float32Array.from(w.weight_ih_l0),
    wHidden: Float32Array.from(w.weight_hh_l0),
    biasInput: Float32Array.from(w.bias_ih_l0),
    biasHidden: Float32Array.from(w.bias_hh_l0),
    wOut: Float32Array.from(w.head_weight),
    bOut: Math.fround(w.head_bias[0]),
    info: {},
  };
}

// torch.testing.assert_close defaults for float32: rtol 1.3e-6, atol 1e-5 (from memory of the
// PyTorch documentation).
function expectTorchClose(actual: ArrayLike<number>, expected: ArrayLike<number>, what: string): void {
  expect(actual.length).toBe(expected.length);
  for (let i = 0; i < expected.length; i++) {
    expect(Math.abs(actual[i] - expected[i]), `${what} ${i}: ${actual[i]} vs ${expected[i]}`).toBeLessThanOrEqual(1e-5 + 1.3e-6 * Math.abs(expected[i]));
  }
}

/**
 * Relative 1e-5: |a − b| ≤ 1e-5·max(|b|, mean |b|). The floor is the outputs' mean magnitude
 * because an output near 0 comes from cancelling terms of ordinary size, where float32 gives an
 * absolute, not a relative, accuracy.
 */
function expectRelativeClose(actual: ArrayLike<number>, expected: ArrayLike<number>): number {
  let scale = 0;
  for (let i = 0; i < expected.length; i++) scale += Math.abs(expected[i]) / expected.length;
  let worst = 0;
  for (let i = 0; i < expected.length; i++) {
    const err = Math.abs(actual[i] - expected[i]) / Math.max(Math.abs(expected[i]), scale);
    worst = Math.max(worst, err);
  }
  expect(worst).toBeLessThanOrEqual(1e-5);
  return worst;
}

async function runOnnx(bytes: Uint8Array, x: Float32Array, dims: number[]): Promise<Float32Array> {
  const session = await ort.InferenceSession.create(bytes, { intraOpNumThreads: 1, interOpNumThreads: 1 });
  const out = await session.run({ [session.inputNames[0]]: new ort.Tensor('float32', x, dims) });
  const data = out[session.outputNames[0]].data as Float32Array;
  await session.release();
  return data;
}

describe('LSTM forward and backward pass against PyTorch', () => {
  it('records the versions that made the fixture', () => {
    expect(ref.versions).toEqual({ torch: '1.13.0a0', onnx: '1.12.0' });
  });

  it('forward pass equals nn.LSTM + nn.Linear on the same weights and inputs', () => {
    const out = predictLstm(torchModel(), Float32Array.from(ref.x), ref.rows, ref.window);
    expectTorchClose(out, ref.output, 'output');
  });

  it('gradient of mse_loss equals autograd for every weight', () => {
    const model = torchModel();
    const { loss, grad } = mseGradient(model, Float32Array.from(ref.x), ref.rows, ref.window, ref.target);
    expect(Math.abs(loss - ref.loss)).toBeLessThanOrEqual(1e-5 + 1.3e-6 * ref.loss);
    const L = paramLayout(model.hidden, model.nInputs);
    const g = ref.gradients;
    expectTorchClose(grad.subarray(L.wInput, L.wHidden), g.weight_ih_l0, 'dW_ih');
    expectTorchClose(grad.subarray(L.wHidden, L.bias), g.weight_hh_l0, 'dW_hh');
    // The two PyTorch biases enter the gates as one sum, so both have this gradient.
    expectTorchClose(grad.subarray(L.bias, L.wOut), g.bias_ih_l0, 'db_ih');
    expectTorchClose(grad.subarray(L.bias, L.wOut), g.bias_hh_l0, 'db_hh');
    expectTorchClose(grad.subarray(L.wOut, L.bOut), g.head_weight, 'dW_head');
    expectTorchClose([grad[L.bOut]], g.head_bias, 'db_head');
  });
});

describe('LSTM export to the ONNX LSTM operator', () => {
  it('onnxruntime equals the forward pass (relative 1e-5) on the PyTorch weights', async () => {
    const model = torchModel();
    const bytes = lstmModelToOnnx(model, { window: ref.window });
    const summary = inspectOnnx(bytes);
    expect(summary.inputs).toEqual([{ name: 'features', elemType: 'float', dims: ['N', ref.window, ref.nInputs] }]);
    expect(summary.outputs).toEqual([{ name: 'residual', elemType: 'float', dims: ['N', 1] }]);
    const x = Float32Array.from(ref.x);
    const fromRuntime = await runOnnx(bytes, x, [ref.rows, ref.window, ref.nInputs]);
    expectRelativeClose(fromRuntime, predictLstm(model, x, ref.rows, ref.window));
    // And so onnxruntime also equals PyTorch.
    expectTorchClose(fromRuntime, ref.output, 'onnxruntime');
  });
});

/** Windows of a made-up series whose residual depends on the input two steps back, nonlinearly. */
function madeUpData(n: number, T: number, seed: number) {
  const prng = createPrng(seed, 3);
  const F = 2;
  const x = new Float32Array(n * T * F);
  const y = new Float64Array(n);
  for (let r = 0; r < n; r++) {
    for (let i = 0; i < T * F; i++) x[r * T * F + i] = prng.normal();
    const a = x[(r * T + T - 3) * F];
    const b = x[(r * T + T - 1) * F + 1];
    y[r] = 3 * Math.tanh(a) + 2 * b + 0.1 * prng.normal() + 5;
  }
  return { x, y, F };
}

describe('LSTM trainer', () => {
  const T = 6;
  const train = madeUpData(3000, T, 1);
  const valid = madeUpData(500, T, 2);
  const data = { x: train.x, nRows: 3000, window: T, nInputs: 2, y: train.y, valid: { x: valid.x, nRows: 500, y: valid.y } };

  it('learns a lagged nonlinear residual, keeps the best epoch, and is exported faithfully', async () => {
    let sd = 0;
    const mean = valid.y.reduce((a, b) => a + b, 0) / 500;
    for (const v of valid.y) sd += (v - mean) ** 2 / 500;
    sd = Math.sqrt(sd);
    const progress: number[] = [];
    const result = trainLstm(data, { hidden: 8, epochs: 25, learningRate: 0.01, patience: 3 }, 7, (d) => progress.push(d));
    const best = Math.min(...result.history);
    // Predicting the mean scores sd (≈ 3.3); the noise alone scores 0.1.
    expect(best).toBeLessThan(0.25 * sd);
    expect(result.history[result.bestEpoch - 1]).toBe(best);
    expect(progress.length).toBeGreaterThan(0);
    const pred = predictLstm(result.model, valid.x, 500, T);
    let s = 0;
    for (let r = 0; r < 500; r++) s += (pred[r] - valid.y[r]) ** 2;
    // float32 rounding of the kept weights moves the score only a little.
    expect(Math.abs(Math.sqrt(s / 500) - best)).toBeLessThan(1e-3 * sd);
    const fromRuntime = await runOnnx(lstmModelToOnnx(result.model, { window: T }), valid.x, [500, T, 2]);
    expectRelativeClose(fromRuntime, pred);
  });

  it('the same seed gives the same model; cancel stops between minibatches', () => {
    const a = trainLstm(data, { hidden: 4, epochs: 2 }, 3);
    const b = trainLstm(data, { hidden: 4, epochs: 2 }, 3);
    expect(Array.from(modelToParams(a.model))).toEqual(Array.from(modelToParams(b.model)));
    let calls = 0;
    const c = trainLstm(data, { hidden: 4, epochs: 5 }, 3, undefined, () => ++calls > 3);
    expect(c.stopReason).toBe('cancelled');
    expect(c.history.length).toBe(0);
  });
});

describe('LSTM and GRU exported by PyTorch (upload fixtures)', () => {
  const outputs = JSON.parse(readFileSync(new URL('upload-outputs.json', dir), 'utf8')) as { versions: Record<string, unknown>; dims: number[]; inputs: number[]; lstm: number[]; gru: number[] };
  it.each(['lstm', 'gru'] as const)('%s: onnxruntime equals PyTorch, batch axis dynamic', async (kind) => {
    expect(outputs.versions).toEqual({ torch: '1.13.0a0', onnx: '1.12.0', opset: 17 });
    const bytes = readFileSync(new URL(`${kind}-upload.onnx`, dir));
    const summary = inspectOnnx(bytes);
    expect(summary.inputs[0]).toEqual({ name: 'features', elemType: 'float', dims: ['N', 8, 3] });
    const out = await runOnnx(bytes, Float32Array.from(outputs.inputs), outputs.dims);
    expectTorchClose(out, outputs[kind], kind);
  });
});
