import { readFileSync } from 'node:fs';
import * as ort from 'onnxruntime-node';
import { describe, expect, it } from 'vitest';

// A model trained outside the project: test/fixtures/torch-mlp/make.py, Debian python3-torch
// 1.13.0a0 + python3-onnx 1.12.0, legacy torch.onnx.export at opset 17. Its outputs must match
// what PyTorch itself computed for the same float32 inputs.
const dir = new URL('../fixtures/torch-mlp/', import.meta.url);
const read = (name: string): unknown => JSON.parse(readFileSync(new URL(name, dir), 'utf8'));
interface Block { name: string; dims: number[]; data: number[] }
const inputs = read('inputs.json') as Record<'mlp' | 'lstm', Block>;
const torchOut = read('torch-outputs.json') as Record<'mlp' | 'lstm', Block> & { versions: Record<string, unknown> };

// torch.testing.assert_close defaults for float32: rtol 1.3e-6, atol 1e-5 (from memory of the
// PyTorch documentation) — the tolerance PyTorch itself uses between float32 implementations.
function expectClose(actual: ArrayLike<number>, expected: number[]): void {
  expect(actual.length).toBe(expected.length);
  for (let i = 0; i < expected.length; i++) {
    expect(Math.abs(actual[i] - expected[i]), `value ${i}`).toBeLessThanOrEqual(1e-5 + 1.3e-6 * Math.abs(expected[i]));
  }
}

async function run(file: string, block: Block, rows?: [number, number]): Promise<ort.Tensor> {
  const session = await ort.InferenceSession.create(readFileSync(new URL(file, dir)));
  const per = block.dims.slice(1).reduce((a, b) => a * b, 1);
  const [from, to] = rows ?? [0, block.dims[0]];
  const data = Float32Array.from(block.data.slice(from * per, to * per));
  const out = await session.run({ features: new ort.Tensor('float32', data, [to - from, ...block.dims.slice(1)]) });
  await session.release();
  return out.residual;
}

describe('PyTorch model exported to ONNX, run by onnxruntime-node', () => {
  it('records the versions that made it', () => {
    expect(torchOut.versions).toEqual({ torch: '1.13.0a0', onnx: '1.12.0', opset: 17 });
  });

  it.each(['mlp', 'lstm'] as const)('%s: outputs equal PyTorch within float32 tolerance', async (kind) => {
    const file = kind === 'mlp' ? 'model.onnx' : 'lstm.onnx';
    const out = await run(file, inputs[kind]);
    expect(out.type).toBe('float32');
    expect(out.dims).toEqual(torchOut[kind].dims);
    expectClose(out.data as Float32Array, torchOut[kind].data);
  });

  it.each(['mlp', 'lstm'] as const)('%s: the batch axis is dynamic (one row at a time gives the same)', async (kind) => {
    const file = kind === 'mlp' ? 'model.onnx' : 'lstm.onnx';
    const n = inputs[kind].dims[0];
    for (const i of [0, n - 1]) {
      const out = await run(file, inputs[kind], [i, i + 1]);
      expect(out.dims).toEqual([1, 1]);
      expectClose(out.data as Float32Array, [torchOut[kind].data[i]]);
    }
  });
});
