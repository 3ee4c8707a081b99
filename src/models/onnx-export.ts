// Writes a TreeModel as an ONNX model with one ai.onnx.ml TreeEnsembleRegressor node (opset 3;
// default-domain opset 17 for the graph). Input "features" float [N, nFeatures], output
// "residual" float [N, 1]. Every split is BRANCH_LEQ (x <= threshold goes to the true/left
// child), matching predictTrees; nodes whose missing values go left set
// nodes_missing_value_tracks_true = 1. Aggregation is SUM over the trees plus base_values, so a
// random forest stores leaf values already divided by the number of trees.
//
// A bundle of several tree models is exported as several ONNX models (one per TreeModel, each
// with the same input/output names), not one graph with several outputs: each file stays a plain
// single-output model that can be loaded, checked and replaced on its own.

import onnxProto from 'onnx-proto';
import type { onnx as OnnxTypes } from 'onnx-proto';
import type { TreeModel } from './trees/types.ts';

const { onnx } = onnxProto;
const AT = onnx.AttributeProto.AttributeType;

export interface OnnxExportOptions {
  /** Width of the "features" input; at least model.nFeatures. */
  nFeatures: number;
  producer?: string;
  /** Extra string metadata stored in the model (e.g. model version, feature spec hash). */
  metadata?: Record<string, string>;
}

const utf8 = new TextEncoder();

function ints(name: string, v: number[]): OnnxTypes.IAttributeProto {
  return { name, type: AT.INTS, ints: v };
}
function floats(name: string, v: number[]): OnnxTypes.IAttributeProto {
  return { name, type: AT.FLOATS, floats: v };
}
function strings(name: string, v: string[]): OnnxTypes.IAttributeProto {
  return { name, type: AT.STRINGS, strings: v.map((s) => utf8.encode(s)) };
}
function string1(name: string, v: string): OnnxTypes.IAttributeProto {
  return { name, type: AT.STRING, s: utf8.encode(v) };
}
function int1(name: string, v: number): OnnxTypes.IAttributeProto {
  return { name, type: AT.INT, i: v };
}

function floatTensorInfo(name: string, dims: (number | string)[]): OnnxTypes.IValueInfoProto {
  return {
    name,
    type: {
      tensorType: {
        elemType: onnx.TensorProto.DataType.FLOAT,
        shape: { dim: dims.map((d) => (typeof d === 'number' ? { dimValue: d } : { dimParam: d })) },
      },
    },
  };
}

function checkModel(model: TreeModel, nFeatures: number): void {
  if (!Number.isInteger(nFeatures) || nFeatures < model.nFeatures) {
    throw new RangeError(`nFeatures (${nFeatures}) must be an integer >= model.nFeatures (${model.nFeatures})`);
  }
  if (model.trees.length === 0) throw new RangeError('model has no trees');
  for (const [t, tr] of model.trees.entries()) {
    const n = tr.feature.length;
    for (let i = 0; i < n; i++) {
      const f = tr.feature[i];
      if (f >= 0) {
        if (f >= nFeatures || !(tr.left[i] > 0 && tr.left[i] < n && tr.right[i] > 0 && tr.right[i] < n)) {
          throw new RangeError(`tree ${t} node ${i} has an invalid feature or child`);
        }
        if (Math.fround(tr.threshold[i]) !== tr.threshold[i]) {
          throw new RangeError(`tree ${t} node ${i}: threshold is not a float32 value`);
        }
      } else if (Math.fround(tr.value[i]) !== tr.value[i]) {
        throw new RangeError(`tree ${t} node ${i}: leaf value is not a float32 value`);
      }
    }
  }
}

export function treeModelToOnnx(model: TreeModel, opts: OnnxExportOptions): Uint8Array {
  checkModel(model, opts.nFeatures);
  const treeIds: number[] = [];
  const nodeIds: number[] = [];
  const featureIds: number[] = [];
  const modes: string[] = [];
  const values: number[] = [];
  const trueIds: number[] = [];
  const falseIds: number[] = [];
  const missingTrue: number[] = [];
  const tTree: number[] = [];
  const tNode: number[] = [];
  const tIds: number[] = [];
  const tWeights: number[] = [];
  let anyMissingLeft = false;
  model.trees.forEach((tr, t) => {
    for (let i = 0; i < tr.feature.length; i++) {
      const split = tr.feature[i] >= 0;
      treeIds.push(t);
      nodeIds.push(i);
      featureIds.push(split ? tr.feature[i] : 0);
      modes.push(split ? 'BRANCH_LEQ' : 'LEAF');
      values.push(split ? tr.threshold[i] : 0);
      trueIds.push(split ? tr.left[i] : 0);
      falseIds.push(split ? tr.right[i] : 0);
      const ml = split && tr.missingLeft[i] === 1 ? 1 : 0;
      if (ml) anyMissingLeft = true;
      missingTrue.push(ml);
      if (!split) {
        tTree.push(t);
        tNode.push(i);
        tIds.push(0);
        tWeights.push(tr.value[i]);
      }
    }
  });
  const attributes: OnnxTypes.IAttributeProto[] = [
    string1('aggregate_function', 'SUM'),
    floats('base_values', [Math.fround(model.baseScore)]),
    int1('n_targets', 1),
    ints('nodes_falsenodeids', falseIds),
    ints('nodes_featureids', featureIds),
    strings('nodes_modes', modes),
    ints('nodes_nodeids', nodeIds),
    ints('nodes_treeids', treeIds),
    ints('nodes_truenodeids', trueIds),
    floats('nodes_values', values),
    string1('post_transform', 'NONE'),
    ints('target_ids', tIds),
    ints('target_nodeids', tNode),
    ints('target_treeids', tTree),
    floats('target_weights', tWeights),
  ];
  // Only written when some split sends missing values left; absent means "NaN goes false/right".
  if (anyMissingLeft) attributes.push(ints('nodes_missing_value_tracks_true', missingTrue));

  const metadata = Object.entries({
    kind: model.kind,
    trees: String(model.trees.length),
    ...opts.metadata,
  }).map(([key, value]) => ({ key, value }));

  const proto = onnx.ModelProto.create({
    irVersion: 8,
    producerName: opts.producer ?? 'streamflow-trust',
    producerVersion: '1',
    opsetImport: [
      { domain: '', version: 17 },
      { domain: 'ai.onnx.ml', version: 3 },
    ],
    metadataProps: metadata,
    graph: {
      name: `${model.kind}-residual`,
      node: [
        {
          opType: 'TreeEnsembleRegressor',
          domain: 'ai.onnx.ml',
          name: 'trees',
          input: ['features'],
          output: ['residual'],
          attribute: attributes,
        },
      ],
      input: [floatTensorInfo('features', ['N', opts.nFeatures])],
      output: [floatTensorInfo('residual', ['N', 1])],
    },
  });
  return onnx.ModelProto.encode(proto).finish();
}
