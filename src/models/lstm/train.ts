// Trains the one-layer LSTM residual model: mean squared error on the standardised residual,
// backpropagation through time over each window, minibatch Adam (Kingma & Ba 2015), gradient
// clipping by global norm (common practice), and early stopping on the validation block: the
// weights of the epoch with the lowest validation RMSE are kept. Float64 during training; the
// model handed back is rounded to float32 (what is exported and served). All buffers are made
// once per training; the per-row loops allocate nothing.
import { createPrng } from '../../core/prng.ts';
import { sigmoid } from './forward.ts';
import type { LstmModel } from './model.ts';

export interface LstmParams {
  hidden: number;
  learningRate: number;
  /** Most passes over the training rows. */
  epochs: number;
  batchSize: number;
  /** Stop after this many epochs without a better validation RMSE. */
  patience: number;
  /** Gradients whose global norm exceeds this are scaled down to it. */
  clipNorm: number;
}

/** Defaults: common practice for small recurrent models, not tuned to any gauge. */
export const defaultLstmParams: LstmParams = { hidden: 16, learningRate: 0.005, epochs: 30, batchSize: 64, patience: 4, clipNorm: 1 };

export interface LstmData {
  /** nRows windows × window × nInputs (row, step, input). */
  x: Float32Array;
  nRows: number;
  window: number;
  nInputs: number;
  /** Residual (m³/s) of each row. */
  y: ArrayLike<number>;
  /** The early-stopping block. */
  valid: { x: Float32Array; nRows: number; y: ArrayLike<number> };
}

export type LstmStopReason = 'epochs' | 'early-stop' | 'cancelled';

/** Where each weight block sits in the flat parameter vector. */
export interface ParamLayout {
  H: number;
  F: number;
  wInput: number;
  wHidden: number;
  bias: number;
  wOut: number;
  bOut: number;
  size: number;
}

export function paramLayout(H: number, F: number): ParamLayout {
  const wInput = 0;
  const wHidden = wInput + 4 * H * F;
  const bias = wHidden + 4 * H * H;
  const wOut = bias + 4 * H;
  const bOut = wOut + H;
  return { H, F, wInput, wHidden, bias, wOut, bOut, size: bOut + 1 };
}

/** The model's weights as one float64 vector (biasInput + biasHidden as one bias). */
export function modelToParams(m: LstmModel): Float64Array {
  const L = paramLayout(m.hidden, m.nInputs);
  const theta = new Float64Array(L.size);
  theta.set(m.wInput, L.wInput);
  theta.set(m.wHidden, L.wHidden);
  for (let g = 0; g < 4 * L.H; g++) theta[L.bias + g] = m.biasInput[g] + m.biasHidden[g];
  theta.set(m.wOut, L.wOut);
  theta[L.bOut] = m.bOut;
  return theta;
}

/** Float32 model from a parameter vector; the output is rescaled by yScale and shifted by yCenter. */
export function paramsToModel(theta: Float64Array, H: number, F: number, yCenter = 0, yScale = 1, info: Record<string, unknown> = {}): LstmModel {
  const L = paramLayout(H, F);
  return {
    kind: 'lstm',
    nInputs: F,
    hidden: H,
    wInput: Float32Array.from(theta.subarray(L.wInput, L.wHidden)),
    wHidden: Float32Array.from(theta.subarray(L.wHidden, L.bias)),
    biasInput: Float32Array.from(theta.subarray(L.bias, L.wOut)),
    biasHidden: new Float32Array(4 * H),
    wOut: Float32Array.from(theta.subarray(L.wOut, L.bOut), (w) => w * yScale),
    bOut: Math.fround(theta[L.bOut] * yScale + yCenter),
    info,
  };
}

/** Forward pass of one window keeping what backpropagation needs; allocation-free. */
class Core {
  readonly L: ParamLayout;
  readonly T: number;
  /** Post-activation gates i, f, g, o per step: [T, 4H]. */
  readonly gates: Float64Array;
  /** c_t and h_t for t = 0 … T (index 0 is the zero start): [(T + 1), H]. */
  readonly c: Float64Array;
  readonly h: Float64Array;
  /** tanh(c_t), t = 1 … T: [T, H]. */
  readonly tc: Float64Array;
  readonly dz: Float64Array;
  readonly dh: Float64Array;
  readonly dc: Float64Array;
  readonly dhPrev: Float64Array;

  constructor(H: number, F: number, T: number) {
    this.L = paramLayout(H, F);
    this.T = T;
    this.gates = new Float64Array(T * 4 * H);
    this.c = new Float64Array((T + 1) * H);
    this.h = new Float64Array((T + 1) * H);
    this.tc = new Float64Array(T * H);
    this.dz = new Float64Array(4 * H);
    this.dh = new Float64Array(H);
    this.dc = new Float64Array(H);
    this.dhPrev = new Float64Array(H);
  }

  /** Prediction for window r of x (standardised units of the parameters). */
  forward(theta: Float64Array, x: Float32Array, r: number, keep: boolean): number {
    const { H, F } = this.L;
    const L = this.L;
    const T = this.T;
    const G = 4 * H;
    const { gates, c, h, tc } = this;
    // Without `keep`, steps overwrite slot 0/1 only: the validation pass needs no history.
    for (let k = 0; k < H; k++) {
      c[k] = 0;
      h[k] = 0;
    }
    for (let t = 0; t < T; t++) {
      const prev = keep ? t * H : 0;
      const next = keep ? (t + 1) * H : H;
      const go = keep ? t * G : 0;
      const xo = (r * T + t) * F;
      for (let g = 0; g < G; g++) {
        let s = theta[L.bias + g];
        const wi = L.wInput + g * F;
        for (let f = 0; f < F; f++) s += theta[wi + f] * x[xo + f];
        const wh = L.wHidden + g * H;
        for (let k = 0; k < H; k++) s += theta[wh + k] * h[prev + k];
        gates[go + g] = s;
      }
      for (let k = 0; k < H; k++) {
        const i = sigmoid(gates[go + k]);
        const fg = sigmoid(gates[go + H + k]);
        const gg = Math.tanh(gates[go + 2 * H + k]);
        const o = sigmoid(gates[go + 3 * H + k]);
        gates[go + k] = i;
        gates[go + H + k] = fg;
        gates[go + 2 * H + k] = gg;
        gates[go + 3 * H + k] = o;
        const cn = fg * c[prev + k] + i * gg;
        const tcn = Math.tanh(cn);
        if (keep) tc[t * H + k] = tcn;
        c[next + k] = cn;
        h[next + k] = o * tcn;
      }
      if (!keep) {
        c.copyWithin(0, H, 2 * H);
        h.copyWithin(0, H, 2 * H);
      }
    }
    const last = keep ? T * H : 0;
    let y = theta[L.bOut];
    for (let k = 0; k < H; k++) y += theta[L.wOut + k] * h[last + k];
    return y;
  }

  /** Adds dLoss/dθ for the window last run by forward(…, keep = true), given dLoss/dy. */
  backward(theta: Float64Array, x: Float32Array, r: number, dy: number, grad: Float64Array): void {
    const { H, F } = this.L;
    const L = this.L;
    const T = this.T;
    const G = 4 * H;
    const { gates, c, h, tc, dz, dh, dc, dhPrev } = this;
    for (let k = 0; k < H; k++) {
      grad[L.wOut + k] += dy * h[T * H + k];
      dh[k] = dy * theta[L.wOut + k];
      dc[k] = 0;
    }
    grad[L.bOut] += dy;
    for (let t = T - 1; t >= 0; t--) {
      const go = t * G;
      for (let k = 0; k < H; k++) {
        const i = gates[go + k];
        const fg = gates[go + H + k];
        const gg = gates[go + 2 * H + k];
        const o = gates[go + 3 * H + k];
        const tcn = tc[t * H + k];
        const dck = dc[k] + dh[k] * o * (1 - tcn * tcn);
        dz[k] = dck * gg * i * (1 - i);
        dz[H + k] = dck * c[t * H + k] * fg * (1 - fg);
        dz[2 * H + k] = dck * i * (1 - gg * gg);
        dz[3 * H + k] = dh[k] * tcn * o * (1 - o);
        dc[k] = dck * fg;
      }
      const xo = (r * T + t) * F;
      const hp = t * H;
      for (let g = 0; g < G; g++) {
        const d = dz[g];
        grad[L.bias + g] += d;
        const wi = L.wInput + g * F;
        for (let f = 0; f < F; f++) grad[wi + f] += d * x[xo + f];
        const wh = L.wHidden + g * H;
        for (let k = 0; k < H; k++) grad[wh + k] += d * h[hp + k];
      }
      if (t > 0) {
        dhPrev.fill(0);
        for (let g = 0; g < G; g++) {
          const d = dz[g];
          const wh = L.wHidden + g * H;
          for (let k = 0; k < H; k++) dhPrev[k] += theta[wh + k] * d;
        }
        dh.set(dhPrev);
      }
    }
  }
}

/**
 * Gradient of PyTorch's mse_loss (mean of squared errors over the rows) with respect to the
 * model's weights, in the paramLayout order; the bias entry is the gradient of either bias.
 * Exposed so the backward pass can be checked against autograd.
 */
export function mseGradient(model: LstmModel, x: Float32Array, nRows: number, window: number, y: ArrayLike<number>): { loss: number; grad: Float64Array } {
  const theta = modelToParams(model);
  const core = new Core(model.hidden, model.nInputs, window);
  const grad = new Float64Array(theta.length);
  let loss = 0;
  for (let r = 0; r < nRows; r++) {
    const e = core.forward(theta, x, r, true) - y[r];
    loss += (e * e) / nRows;
    core.backward(theta, x, r, (2 * e) / nRows, grad);
  }
  return { loss, grad };
}

export interface LstmTrainResult {
  model: LstmModel;
  /** Validation RMSE (m³/s) after each epoch. */
  history: number[];
  bestEpoch: number;
  stopReason: LstmStopReason;
}

export function trainLstm(
  data: LstmData,
  options: Partial<LstmParams>,
  seed: number,
  onProgress?: (done: number, total: number) => void,
  shouldStop?: () => boolean,
): LstmTrainResult {
  const p: LstmParams = { ...defaultLstmParams, ...options };
  const H = Math.round(p.hidden);
  const F = data.nInputs;
  const T = data.window;
  if (!(H >= 1 && H <= 256)) throw new RangeError('hidden must be from 1 to 256');
  if (!(p.learningRate > 0 && p.learningRate < 1)) throw new RangeError('learningRate must be in (0, 1)');
  if (data.nRows < 1 || data.valid.nRows < 1) throw new RangeError('training and validation rows are needed');
  const batch = Math.max(1, Math.round(p.batchSize));
  const epochs = Math.max(1, Math.round(p.epochs));
  const L = paramLayout(H, F);

  // Standardise the target so one learning rate suits every gauge; undone when the model is made.
  let mean = 0;
  for (let r = 0; r < data.nRows; r++) mean += data.y[r] / data.nRows;
  let sq = 0;
  for (let r = 0; r < data.nRows; r++) sq += (data.y[r] - mean) ** 2;
  const sd = Math.sqrt(sq / data.nRows) || 1;

  const prng = createPrng(seed, 11);
  const theta = new Float64Array(L.size);
  // Uniform(−1/√H, 1/√H), PyTorch's nn.LSTM initialisation (from memory of its documentation);
  // forget-gate bias 1 (common practice since Gers et al. 2000), output bias 0.
  const bound = 1 / Math.sqrt(H);
  for (let i = 0; i < L.bOut; i++) theta[i] = (2 * prng.nextFloat() - 1) * bound;
  for (let k = 0; k < H; k++) theta[L.bias + H + k] = 1;
  theta[L.bOut] = 0;

  const grad = new Float64Array(L.size);
  const m1 = new Float64Array(L.size);
  const m2 = new Float64Array(L.size);
  const best = Float64Array.from(theta);
  const order = Int32Array.from({ length: data.nRows }, (_, i) => i);
  const core = new Core(H, F, T);
  const beta1 = 0.9;
  const beta2 = 0.999;
  const eps = 1e-8;
  let step = 0;
  let bestRmse = Infinity;
  let bestEpoch = -1;
  let wait = 0;
  let stopReason: LstmStopReason = 'epochs';
  const history: number[] = [];

  const validRmse = (): number => {
    let s = 0;
    for (let r = 0; r < data.valid.nRows; r++) {
      const e = core.forward(theta, data.valid.x, r, false) * sd + mean - data.valid.y[r];
      s += e * e;
    }
    return Math.sqrt(s / data.valid.nRows);
  };

  outer: for (let epoch = 0; epoch < epochs; epoch++) {
    for (let i = data.nRows - 1; i > 0; i--) {
      const j = Math.floor(prng.nextFloat() * (i + 1));
      const t = order[i];
      order[i] = order[j];
      order[j] = t;
    }
    for (let start = 0; start < data.nRows; start += batch) {
      if (shouldStop?.()) {
        stopReason = 'cancelled';
        break outer;
      }
      const end = Math.min(data.nRows, start + batch);
      const nb = end - start;
      grad.fill(0);
      for (let b = start; b < end; b++) {
        const r = order[b];
        const e = core.forward(theta, data.x, r, true) - (data.y[r] - mean) / sd;
        core.backward(theta, data.x, r, (2 * e) / nb, grad);
      }
      let norm = 0;
      for (let i = 0; i < L.size; i++) norm += grad[i] * grad[i];
      norm = Math.sqrt(norm);
      const clip = norm > p.clipNorm ? p.clipNorm / norm : 1;
      step++;
      const c1 = 1 - beta1 ** step;
      const c2 = 1 - beta2 ** step;
      for (let i = 0; i < L.size; i++) {
        const g = grad[i] * clip;
        m1[i] = beta1 * m1[i] + (1 - beta1) * g;
        m2[i] = beta2 * m2[i] + (1 - beta2) * g * g;
        theta[i] -= (p.learningRate * (m1[i] / c1)) / (Math.sqrt(m2[i] / c2) + eps);
      }
    }
    const v = validRmse();
    history.push(v);
    if (v < bestRmse) {
      bestRmse = v;
      bestEpoch = epoch;
      best.set(theta);
      wait = 0;
    } else if (++wait >= p.patience) {
      stopReason = 'early-stop';
      onProgress?.(epochs, epochs);
      break;
    }
    onProgress?.(epoch + 1, epochs);
  }
  if (bestEpoch < 0) best.set(theta);
  const info = { epochs: history.length, bestEpoch: bestEpoch + 1, validationRmse: bestRmse, stopReason, hidden: H, window: T, learningRate: p.learningRate, batchSize: batch };
  return { model: paramsToModel(best, H, F, mean, sd, info), history, bestEpoch: bestEpoch + 1, stopReason };
}
