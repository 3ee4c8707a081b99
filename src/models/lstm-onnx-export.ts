// Writes an LstmModel as an ONNX model built on the standard LSTM operator (default domain,
// opset 17), the layout PyTorch's exporter produces: input "features" float [N, window, F] →
// Transpose to [window, N, F] → LSTM (forward, hidden_size H) → Y_h [1, N, H] → Squeeze →
// MatMul [H, 1] → Add → output "residual" float [N, 1]. ONNX orders the gate blocks i, o, f, c
// (the operator's specification); the model keeps PyTorch's i, f, g, o, so blocks are reordered.
import onnxProto from 'onnx-proto';
import type { onnx as OnnxTypes } from 'onnx-proto';
import { checkLstmModel, type LstmModel } from './lstm/model.ts';

const { onnx } = onnxProto;
const AT = onnx.AttributeProto.AttributeType;
const FLOAT = onnx.TensorProto.DataType.FLOAT;
const INT64 = onnx.TensorProto.DataType.INT64;

export interface LstmOnnxOptions {
  window: number;
  producer?: string;
  metadata?: Record<string, string>;
}

/** PyTorch block b (i, f, g, o) goes to ONNX block ONNX_BLOCK[b] (i, o, f, c). */
const ONNX_BLOCK = [0, 2, 3, 1];

function reorder(src: Float32Array, H: number, rowWidth: number): Float32Array {
  const out = new Float32Array(src.length);
  for (let b = 0; b < 4; b++) out.set(src.subarray(b * H * rowWidth, (b + 1) * H * rowWidth), ONNX_BLOCK[b] * H * rowWidth);
  return out;
}

function floatTensor(name: string, dims: number[], data: Float32Array): OnnxTypes.ITensorProto {
  const bytes = new Uint8Array(data.length * 4);
  const view = new DataView(bytes.buffer);
  for (let i = 0; i < data.length; i++) view.setFloat32(i * 4, data[i], true);
  return { name, dims, dataType: FLOAT, rawData: bytes };
}

function floatInfo(name: string, dims: (number | string)[]): OnnxTypes.IValueInfoProto {
  return { name, type: { tensorType: { elemType: FLOAT, shape: { dim: dims.map((d) => (typeof d === 'number' ? { dimValue: d } : { dimParam: d })) } } } };
}

export function lstmModelToOnnx(model: LstmModel, opts: LstmOnnxOptions): Uint8Array {
  checkLstmModel(model);
  const H = model.hidden;
  const F = model.nInputs;
  if (!(Number.isInteger(opts.window) && opts.window >= 1)) throw new RangeError('window must be a positive integer');
  const bias = new Float32Array(8 * H);
  bias.set(reorder(model.biasInput, H, 1), 0);
  bias.set(reorder(model.biasHidden, H, 1), 4 * H);
  const initializer: OnnxTypes.ITensorProto[] = [
    floatTensor('lstm_W', [1, 4 * H, F], reorder(model.wInput, H, F)),
    floatTensor('lstm_R', [1, 4 * H, H], reorder(model.wHidden, H, H)),
    floatTensor('lstm_B', [1, 8 * H], bias),
    { name: 'squeeze_axes', dims: [1], dataType: INT64, int64Data: [0] },
    floatTensor('out_W', [H, 1], model.wOut),
    floatTensor('out_b', [1], Float32Array.of(model.bOut)),
  ];
  const node: OnnxTypes.INodeProto[] = [
    { opType: 'Transpose', name: 'to_time_major', input: ['features'], output: ['features_tnf'], attribute: [{ name: 'perm', type: AT.INTS, ints: [1, 0, 2] }] },
    {
      opType: 'LSTM',
      name: 'lstm',
      input: ['features_tnf', 'lstm_W', 'lstm_R', 'lstm_B'],
      output: ['', 'lstm_h_last'],
      attribute: [
        { name: 'hidden_size', type: AT.INT, i: H },
        { name: 'direction', type: AT.STRING, s: new TextEncoder().encode('forward') },
      ],
    },
    { opType: 'Squeeze', name: 'drop_direction', input: ['lstm_h_last', 'squeeze_axes'], output: ['h_last'] },
    { opType: 'MatMul', name: 'head', input: ['h_last', 'out_W'], output: ['head_out'] },
    { opType: 'Add', name: 'head_bias', input: ['head_out', 'out_b'], output: ['residual'] },
  ];
  const metadata = Object.entries({ kind: 'lstm', hidden: String(H), window: String(opts.window), ...opts.metadata }).map(([key, value]) => ({ key, value }));
  const proto = onnx.ModelProto.create({
    irVersion: 8,
    producerName: opts.producer ?? 'streamflow-trust',
    producerVersion: '1',
    opsetImport: [{ domain: '', version: 17 }],
    metadataProps: metadata,
    graph: {
      name: 'lstm-residual',
      node,
      initializer,
      input: [floatInfo('features', ['N', opts.window, F])],
      output: [floatInfo('residual', ['N', 1])],
    },
  });
  return onnx.ModelProto.encode(proto).finish();
}
