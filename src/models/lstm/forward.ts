// The LSTM forward pass (Hochreiter & Schmidhuber 1997, with the forget gate of Gers et al. 2000,
// as PyTorch's nn.LSTM and the ONNX LSTM operator define it):
//   z = W x_t + b_W + R h_{t−1} + b_R;   i, f, o = σ(z_i, z_f, z_o);   g = tanh(z_g)
//   c_t = f ⊙ c_{t−1} + i ⊙ g;           h_t = o ⊙ tanh(c_t)
// from h_0 = c_0 = 0, then residual = wOut · h_T + bOut. Sums in float64 over float32 weights and
// inputs; no allocation per row or step (the workspace is reused).
import type { LstmModel } from './model.ts';

export interface LstmWorkspace {
  h: Float64Array;
  c: Float64Array;
  z: Float64Array;
}

export function createLstmWorkspace(hidden: number): LstmWorkspace {
  return { h: new Float64Array(hidden), c: new Float64Array(hidden), z: new Float64Array(4 * hidden) };
}

export const sigmoid = (v: number): number => 1 / (1 + Math.exp(-v));

/**
 * Residuals for nRows windows: x holds nRows × window × nInputs values (row, step, input),
 * the memory of an [N, window, nInputs] tensor. Writes out[0 … nRows − 1].
 */
export function predictLstm(
  model: LstmModel,
  x: Float32Array,
  nRows: number,
  window: number,
  out: Float64Array | Float32Array = new Float64Array(nRows),
  ws: LstmWorkspace = createLstmWorkspace(model.hidden),
): Float64Array | Float32Array {
  const H = model.hidden;
  const F = model.nInputs;
  if (x.length < nRows * window * F) throw new RangeError(`x holds ${x.length} values, ${nRows * window * F} needed`);
  const { wInput, wHidden, biasInput, biasHidden, wOut } = model;
  const { h, c, z } = ws;
  const G = 4 * H;
  for (let r = 0; r < nRows; r++) {
    h.fill(0);
    c.fill(0);
    for (let t = 0; t < window; t++) {
      const xo = (r * window + t) * F;
      for (let g = 0; g < G; g++) {
        let s = biasInput[g] + biasHidden[g];
        const wi = g * F;
        for (let f = 0; f < F; f++) s += wInput[wi + f] * x[xo + f];
        const wh = g * H;
        for (let k = 0; k < H; k++) s += wHidden[wh + k] * h[k];
        z[g] = s;
      }
      for (let k = 0; k < H; k++) {
        const i = sigmoid(z[k]);
        const fg = sigmoid(z[H + k]);
        const gg = Math.tanh(z[2 * H + k]);
        const o = sigmoid(z[3 * H + k]);
        c[k] = fg * c[k] + i * gg;
        h[k] = o * Math.tanh(c[k]);
      }
    }
    let y = model.bOut;
    for (let k = 0; k < H; k++) y += wOut[k] * h[k];
    out[r] = y;
  }
  return out;
}
