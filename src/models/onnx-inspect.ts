// Reads what an ONNX model declares (inputs, outputs, opsets, producer) straight from its
// protobuf bytes, without creating an inference session: cheap enough to check an upload
// before it is stored.
import onnxProto from 'onnx-proto';

const { onnx } = onnxProto;

export interface OnnxValueInfo {
  name: string;
  /** ONNX element type in lower case ('float', 'double', 'int64', …), or 'sequence' / 'map' /
   *  'optional' / 'sparse_tensor' for non-tensor values, 'unknown' when not declared. */
  elemType: string;
  /** Per dimension: a fixed size, a symbolic name (e.g. a dynamic batch axis), or null when
   *  neither is given. Empty when the shape is not declared (or the value is a scalar). */
  dims: (number | string | null)[];
}

export interface OnnxSummary {
  irVersion: number;
  inputs: OnnxValueInfo[];
  outputs: OnnxValueInfo[];
  /** Operator sets imported; the default domain '' is reported as 'ai.onnx'. */
  opsets: { domain: string; version: number }[];
  producer: { name: string; version: string };
}

export class OnnxInspectError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'OnnxInspectError';
  }
}

type Int64 = number | { toNumber(): number } | { low: number; high: number } | null | undefined;

function toNumber(v: Int64): number {
  if (v === null || v === undefined) return 0;
  if (typeof v === 'number') return v;
  if ('toNumber' in v) return v.toNumber();
  return v.high * 4294967296 + (v.low >>> 0);
}

function elemTypeName(code: number): string {
  const name = (onnx.TensorProto.DataType as unknown as Record<number, string>)[code];
  return name === undefined ? `type_${code}` : name.toLowerCase();
}

function describe(v: onnxProto.onnx.IValueInfoProto): OnnxValueInfo {
  const name = v.name ?? '';
  const t = v.type;
  if (!t) return { name, elemType: 'unknown', dims: [] };
  if (t.tensorType) {
    const dims = (t.tensorType.shape?.dim ?? []).map((d): number | string | null => {
      if (d.dimParam) return d.dimParam;
      if (d.dimValue !== null && d.dimValue !== undefined) return toNumber(d.dimValue as Int64);
      return null;
    });
    return { name, elemType: elemTypeName(t.tensorType.elemType ?? 0), dims };
  }
  const other = t.sequenceType
    ? 'sequence'
    : t.mapType
      ? 'map'
      : t.optionalType
        ? 'optional'
        : t.sparseTensorType
          ? 'sparse_tensor'
          : 'unknown';
  return { name, elemType: other, dims: [] };
}

export function inspectOnnx(bytes: Uint8Array): OnnxSummary {
  let model: onnxProto.onnx.ModelProto;
  try {
    model = onnx.ModelProto.decode(bytes);
  } catch (e) {
    throw new OnnxInspectError(`not an ONNX model: ${e instanceof Error ? e.message : String(e)}`);
  }
  const graph = model.graph;
  if (!graph || !model.opsetImport || model.opsetImport.length === 0) {
    throw new OnnxInspectError('not an ONNX model: no graph or no operator set');
  }
  // Older exporters also list initializers (weights) as graph inputs; they are not fed by callers.
  const weights = new Set((graph.initializer ?? []).map((i) => i.name));
  return {
    irVersion: toNumber(model.irVersion as Int64),
    inputs: (graph.input ?? []).filter((i) => !weights.has(i.name)).map(describe),
    outputs: (graph.output ?? []).map(describe),
    opsets: model.opsetImport.map((o) => ({ domain: o.domain || 'ai.onnx', version: toNumber(o.version as Int64) })),
    producer: { name: model.producerName ?? '', version: model.producerVersion ?? '' },
  };
}
