// A one-layer LSTM residual model: the LSTM reads a window [window, nInputs] oldest step first,
// its last hidden state goes through one linear output, which is the residual (m³/s).
// Weights are float32 (what is exported and served); gate blocks are in PyTorch's order
// (input, forget, cell, output) so PyTorch weights load as they are; the ONNX export reorders.

export interface LstmModel {
  kind: 'lstm';
  nInputs: number;
  hidden: number;
  /** [4·hidden, nInputs], row-major, gate blocks i, f, g, o (PyTorch weight_ih_l0). */
  wInput: Float32Array;
  /** [4·hidden, hidden] (PyTorch weight_hh_l0). */
  wHidden: Float32Array;
  /** [4·hidden] each (PyTorch bias_ih_l0 and bias_hh_l0; the in-house trainer keeps biasHidden at 0). */
  biasInput: Float32Array;
  biasHidden: Float32Array;
  /** [hidden] and one value: residual = wOut · h_last + bOut. */
  wOut: Float32Array;
  bOut: number;
  /** What the trainer did (epochs, early stop, …); empty for a loaded model. */
  info: Record<string, unknown>;
}

export function checkLstmModel(m: LstmModel): void {
  const H = m.hidden;
  const F = m.nInputs;
  if (!(Number.isInteger(H) && H >= 1 && Number.isInteger(F) && F >= 1)) throw new RangeError('hidden and nInputs must be positive integers');
  const sizes: [string, number, number][] = [
    ['wInput', m.wInput.length, 4 * H * F],
    ['wHidden', m.wHidden.length, 4 * H * H],
    ['biasInput', m.biasInput.length, 4 * H],
    ['biasHidden', m.biasHidden.length, 4 * H],
    ['wOut', m.wOut.length, H],
  ];
  for (const [name, got, want] of sizes) if (got !== want) throw new RangeError(`${name} holds ${got} values, ${want} expected`);
  if (Math.fround(m.bOut) !== m.bOut) throw new RangeError('bOut is not a float32 value');
}
