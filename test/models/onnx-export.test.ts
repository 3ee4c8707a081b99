// The exported ONNX model, run by onnxruntime-node 1.30 (CPU), must give bitwise the float32
// predictions of predictTrees on every row. Sessions use intraOpNumThreads = 1: with several
// threads onnxruntime may add the trees' leaf values in another order (parallel partial sums),
// which changes the last bit of some outputs.
import { describe, expect, it } from 'vitest';
import * as ort from 'onnxruntime-node';
import onnxProto from 'onnx-proto';
import { trainGradientBoosting, trainRandomForest, predictTrees, type TreeModel } from '../../src/models/trees/index.ts';
import { treeModelToOnnx } from '../../src/models/onnx-export.ts';
import { sinSquare } from './trees/synthetic.ts';

async function runOnnx(bytes: Uint8Array, x: Float32Array, nRows: number, nFeatures: number): Promise<ort.Tensor> {
  const session = await ort.InferenceSession.create(bytes, { intraOpNumThreads: 1, interOpNumThreads: 1 });
  try {
    const out = await session.run({ features: new ort.Tensor('float32', x, [nRows, nFeatures]) });
    return out.residual;
  } finally {
    await session.release();
  }
}

/** Number of rows whose float32 outputs differ in any bit. */
function bitDifferences(a: Float32Array, b: Float32Array): number {
  const ua = new Uint32Array(a.buffer, a.byteOffset, a.length);
  const ub = new Uint32Array(b.buffer, b.byteOffset, b.length);
  let n = 0;
  for (let i = 0; i < ua.length; i++) if (ua[i] !== ub[i]) n++;
  return n;
}

async function expectSameAsOnnx(model: TreeModel, x: Float32Array, nRows: number): Promise<void> {
  const ours = predictTrees(model, x, nRows);
  const out = await runOnnx(treeModelToOnnx(model, { nFeatures: model.nFeatures }), x, nRows, model.nFeatures);
  expect(out.dims).toEqual([nRows, 1]);
  expect(out.type).toBe('float32');
  expect(bitDifferences(ours, out.data as Float32Array)).toBe(0);
}

describe('treeModelToOnnx + onnxruntime', () => {
  const train = sinSquare(3000, 0.1, 1, 0.2); // 20 % of x3 missing
  const test = sinSquare(1500, 0.1, 2, 0.2);

  for (const maxDepth of [1, 3, 6, 10]) {
    it(`gradient boosting, depth ${maxDepth}, row and column subsampling: bitwise equal`, async () => {
      const model = trainGradientBoosting(
        train,
        { nRounds: 120, maxDepth, learningRate: 0.2, rowSample: 0.8, colSample: 0.75, patience: 0 },
        maxDepth,
      );
      await expectSameAsOnnx(model, train.x, train.nRows);
      await expectSameAsOnnx(model, test.x, test.nRows);
    });
  }

  for (const maxDepth of [2, 8, 16]) {
    it(`random forest, depth ${maxDepth}: bitwise equal`, async () => {
      const model = trainRandomForest(train, { nTrees: 60, maxDepth, mtry: 2, minLeafRows: 2 }, maxDepth);
      await expectSameAsOnnx(model, test.x, test.nRows);
    });
  }

  it('missing values follow the learned direction in onnxruntime too', async () => {
    const model = trainGradientBoosting(train, { nRounds: 60, maxDepth: 4, patience: 0 }, 3);
    const withMissingLeft = model.trees.some((t) => t.missingLeft.includes(1));
    expect(withMissingLeft).toBe(true); // so nodes_missing_value_tracks_true is exercised
    // Every feature missing in some rows, including features trained without any NaN.
    const x = test.x.slice();
    for (let r = 0; r < test.nRows; r += 7) x[r * 4 + (r % 4)] = NaN;
    await expectSameAsOnnx(model, x, test.nRows);
  });

  it('handles trees that are a single leaf, one row, and values on the thresholds', async () => {
    const stump = trainGradientBoosting(train, { nRounds: 3, gamma: 1e9, patience: 0 }, 1);
    expect(stump.trees[0].feature).toEqual([-1]);
    await expectSameAsOnnx(stump, test.x.slice(0, 4), 1);
    const model = trainGradientBoosting(train, { nRounds: 30, maxDepth: 5, patience: 0 }, 1);
    // Rows made of the split thresholds themselves: x <= t must go left in both.
    const x = new Float32Array(model.trees.length * 4).fill(0);
    model.trees.forEach((t, i) => {
      t.feature.forEach((f, j) => { if (f >= 0) x[i * 4 + f] = t.threshold[j]; });
    });
    await expectSameAsOnnx(model, x, model.trees.length);
  });

  it('writes ai.onnx.ml opset 3, BRANCH_LEQ splits, input "features" [N, p], output "residual" [N, 1]', () => {
    const model = trainGradientBoosting(train, { nRounds: 5, maxDepth: 2, patience: 0 }, 1);
    const bytes = treeModelToOnnx(model, { nFeatures: 4, producer: 'test', metadata: { version: '7' } });
    const m = onnxProto.onnx.ModelProto.decode(bytes);
    expect(m.producerName).toBe('test');
    const opsets = Object.fromEntries(m.opsetImport.map((o) => [o.domain, Number(o.version)]));
    expect(opsets).toEqual({ '': 17, 'ai.onnx.ml': 3 });
    const graph = m.graph!;
    const node = graph.node![0];
    const attribute = node.attribute!;
    expect(node.opType).toBe('TreeEnsembleRegressor');
    expect(node.domain).toBe('ai.onnx.ml');
    const modes = attribute.find((a) => a.name === 'nodes_modes')!.strings!.map((s) => new TextDecoder().decode(s));
    expect(new Set(modes)).toEqual(new Set(['BRANCH_LEQ', 'LEAF']));
    const base = attribute.find((a) => a.name === 'base_values')!.floats;
    expect(base).toEqual([model.baseScore]);
    expect(graph.input![0].name).toBe('features');
    expect(graph.input![0].type!.tensorType!.shape!.dim!.map((d) => d.dimParam || Number(d.dimValue))).toEqual(['N', 4]);
    expect(graph.output![0].name).toBe('residual');
    expect(m.metadataProps.find((p) => p.key === 'version')!.value).toBe('7');
  });

  it('accepts a wider input than the model uses and refuses a narrower one', async () => {
    const model = trainGradientBoosting(train, { nRounds: 10, maxDepth: 3, patience: 0 }, 1);
    const bytes = treeModelToOnnx(model, { nFeatures: 6 });
    const n = 50;
    const wide = new Float32Array(n * 6);
    for (let r = 0; r < n; r++) for (let f = 0; f < 4; f++) wide[r * 6 + f] = test.x[r * 4 + f];
    const out = await runOnnx(bytes, wide, n, 6);
    expect(bitDifferences(predictTrees(model, test.x.slice(0, n * 4), n), out.data as Float32Array)).toBe(0);
    expect(() => treeModelToOnnx(model, { nFeatures: 3 })).toThrow(/nFeatures/);
  });
});
