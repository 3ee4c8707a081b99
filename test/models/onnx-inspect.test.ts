import { readFileSync } from 'node:fs';
import onnxProto from 'onnx-proto';
import { describe, expect, it } from 'vitest';
import { OnnxInspectError, inspectOnnx } from '../../src/models/onnx-inspect.ts';

// Reference: what Debian python3-onnx 1.12.0 (onnx.load) reads from the same files, written by
// test/fixtures/torch-mlp/make.py into torch-outputs.json ("onnxSummary").
const dir = new URL('../fixtures/torch-mlp/', import.meta.url);
const reference = JSON.parse(readFileSync(new URL('torch-outputs.json', dir), 'utf8')).onnxSummary as Record<
  string,
  unknown
>;

describe('inspectOnnx', () => {
  it.each(['model.onnx', 'lstm.onnx'])('reads %s as python3-onnx does', (file) => {
    const summary = inspectOnnx(new Uint8Array(readFileSync(new URL(file, dir))));
    expect(summary).toEqual(reference[file]);
  });

  it('drops initializers listed as inputs and reports non-tensor and unnamed dimensions', () => {
    const { onnx } = onnxProto;
    const float = onnx.TensorProto.DataType.FLOAT;
    const bytes = onnx.ModelProto.encode({
      irVersion: 3,
      producerName: 'hand-made',
      producerVersion: '0',
      opsetImport: [{ domain: '', version: 9 }, { domain: 'ai.onnx.ml', version: 3 }],
      graph: {
        name: 'g',
        initializer: [{ name: 'w', dataType: float, dims: [2], floatData: [1, 2] }],
        input: [
          { name: 'x', type: { tensorType: { elemType: onnx.TensorProto.DataType.DOUBLE, shape: { dim: [{ dimParam: 'batch' }, {}] } } } },
          { name: 'w', type: { tensorType: { elemType: float, shape: { dim: [{ dimValue: 2 }] } } } },
        ],
        output: [
          { name: 'y', type: { tensorType: { elemType: onnx.TensorProto.DataType.INT64 } } },
          { name: 'probabilities', type: { sequenceType: { elemType: { mapType: { keyType: 7, valueType: { tensorType: { elemType: float } } } } } } },
        ],
      },
    }).finish();
    expect(inspectOnnx(bytes)).toEqual({
      irVersion: 3,
      inputs: [{ name: 'x', elemType: 'double', dims: ['batch', null] }],
      outputs: [
        { name: 'y', elemType: 'int64', dims: [] },
        { name: 'probabilities', elemType: 'sequence', dims: [] },
      ],
      opsets: [{ domain: 'ai.onnx', version: 9 }, { domain: 'ai.onnx.ml', version: 3 }],
      producer: { name: 'hand-made', version: '0' },
    });
  });

  it('rejects bytes that are not a model', () => {
    expect(() => inspectOnnx(new TextEncoder().encode('definitely not protobuf'))).toThrow(OnnxInspectError);
    expect(() => inspectOnnx(new Uint8Array(0))).toThrow(/no graph/);
  });
});
