import { archiveStrata, rankTemplateValues, validateArchive, type ErrorArchive, type NeighbourSettings } from './error-archive.ts';
import type { ErrorTransform } from './error-transform.ts';
import { pathCount, type ForcingPaths } from './forcing-paths.ts';

/**
 * Storage forms of an ErrorArchive. templateRank is derived and never stored; it is recomputed
 * on decoding, and every decoded archive is validated.
 *
 * Bytes (e.g. a Postgres bytea column), little-endian:
 *   0   4 bytes  ASCII "ERRA"
 *   4   uint32   layout version (1)
 *   8   uint32   byte length J of the JSON header
 *   12  J bytes  UTF-8 JSON {format, transform, nLeads, templateLength, nCases, nTemplates, seriesLength,
 *                neighbours?, issueErrorEdges?, leadScale?, forcingPaths?: {nPaths, nLeads}}
 *   then, each starting at a multiple of 8 bytes (zero padding):
 *       groupStart Int32[max(nLeads,1)·strata+1], predictor Float64[nCases], error Float64[nCases],
 *       dayOfYear Uint16[nCases], templateValues Float64[seriesLength] (NaN = missing),
 *       templateStart Int32[nTemplates], templateDayOfYear Uint16[nTemplates]
 *       and with forcingPaths: values Float64[nPaths·nLeads]
 * Size ≈ 18 bytes per case + 8 per template series value + 6 per template.
 *
 * JSON: the same fields as plain arrays, NaN written as null.
 */

const MAGIC = [0x45, 0x52, 0x52, 0x41]; // "ERRA"
const LAYOUT = 1;

interface Header {
  format: 1;
  transform: ErrorTransform;
  nLeads: number;
  templateLength: number;
  nCases: number;
  nTemplates: number;
  seriesLength: number;
  neighbours?: NeighbourSettings;
  issueErrorEdges?: number[];
  leadScale?: number[];
  forcingPaths?: { nPaths: number; nLeads: number };
}

function assertLittleEndian(): void {
  if (new Uint8Array(new Uint16Array([1]).buffer)[0] !== 1) {
    throw new Error('archive byte layout is little-endian; this host is big-endian');
  }
}

const pad8 = (n: number): number => (n + 7) & ~7;

export function archiveToBytes(a: ErrorArchive): Uint8Array {
  assertLittleEndian();
  const header: Header = {
    format: 1,
    transform: a.transform,
    nLeads: a.nLeads,
    templateLength: a.templateLength,
    nCases: a.predictor.length,
    nTemplates: a.templateStart.length,
    seriesLength: a.templateValues.length,
    ...(a.neighbours ? { neighbours: a.neighbours } : {}),
    ...(a.issueErrorEdges ? { issueErrorEdges: Array.from(a.issueErrorEdges) } : {}),
    ...(a.leadScale ? { leadScale: Array.from(a.leadScale) } : {}),
    ...(a.forcingPaths ? { forcingPaths: { nPaths: pathCount(a.forcingPaths), nLeads: a.forcingPaths.nLeads } } : {}),
  };
  const json = new TextEncoder().encode(JSON.stringify(header));
  const sections: ArrayBufferView[] = [
    a.groupStart,
    a.predictor,
    a.error,
    a.dayOfYear,
    a.templateValues,
    a.templateStart,
    a.templateDayOfYear,
    ...(a.forcingPaths ? [a.forcingPaths.values] : []),
  ];
  let size = pad8(12 + json.length);
  for (const s of sections) size += pad8(s.byteLength);
  const out = new Uint8Array(size);
  out.set(MAGIC, 0);
  const dv = new DataView(out.buffer);
  dv.setUint32(4, LAYOUT, true);
  dv.setUint32(8, json.length, true);
  out.set(json, 12);
  let off = pad8(12 + json.length);
  for (const s of sections) {
    out.set(new Uint8Array(s.buffer, s.byteOffset, s.byteLength), off);
    off += pad8(s.byteLength);
  }
  return out;
}

export function archiveFromBytes(bytes: Uint8Array): ErrorArchive {
  assertLittleEndian();
  if (bytes.length < 12 || MAGIC.some((m, i) => bytes[i] !== m)) throw new RangeError('not an error archive (bad magic)');
  const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const layout = dv.getUint32(4, true);
  if (layout !== LAYOUT) throw new RangeError(`unsupported archive layout ${layout}`);
  const jsonLength = dv.getUint32(8, true);
  if (12 + jsonLength > bytes.length) throw new RangeError('archive header runs past the end');
  const h = JSON.parse(new TextDecoder().decode(bytes.subarray(12, 12 + jsonLength))) as Header;
  let off = pad8(12 + jsonLength);
  // Copy each section into its own aligned buffer (the input may be any Buffer slice).
  const take = <T>(n: number, bytesPer: number, make: (b: ArrayBuffer) => T): T => {
    const len = n * bytesPer;
    if (!(Number.isInteger(n) && n >= 0) || off + len > bytes.length) throw new RangeError('archive sections run past the end');
    const buf = new ArrayBuffer(len);
    new Uint8Array(buf).set(bytes.subarray(off, off + len));
    off += pad8(len);
    return make(buf);
  };
  const issueErrorEdges = h.issueErrorEdges ? Float64Array.from(h.issueErrorEdges) : undefined;
  const groupStart = take(Math.max(h.nLeads, 1) * archiveStrata({ issueErrorEdges }) + 1, 4, (b) => new Int32Array(b));
  const predictor = take(h.nCases, 8, (b) => new Float64Array(b));
  const error = take(h.nCases, 8, (b) => new Float64Array(b));
  const dayOfYear = take(h.nCases, 2, (b) => new Uint16Array(b));
  const templateValues = take(h.seriesLength, 8, (b) => new Float64Array(b));
  const templateStart = take(h.nTemplates, 4, (b) => new Int32Array(b));
  const templateDayOfYear = take(h.nTemplates, 2, (b) => new Uint16Array(b));
  const fp = h.forcingPaths;
  const forcingPaths: ForcingPaths | undefined = fp
    ? { nLeads: fp.nLeads, values: take(fp.nPaths * fp.nLeads, 8, (b) => new Float64Array(b)) }
    : undefined;
  const a: ErrorArchive = {
    format: h.format,
    transform: h.transform,
    nLeads: h.nLeads,
    groupStart,
    predictor,
    error,
    dayOfYear,
    templateLength: h.templateLength,
    templateValues,
    templateStart,
    templateDayOfYear,
    templateRank: rankTemplateValues(templateValues, h.nLeads),
    ...(h.neighbours ? { neighbours: h.neighbours } : {}),
    ...(issueErrorEdges ? { issueErrorEdges } : {}),
    ...(h.leadScale ? { leadScale: Float64Array.from(h.leadScale) } : {}),
    ...(forcingPaths ? { forcingPaths } : {}),
  };
  validateArchive(a);
  return a;
}

/** Plain-JSON form of an archive (NaN → null). */
export interface ErrorArchiveJson {
  format: 1;
  transform: ErrorTransform;
  nLeads: number;
  templateLength: number;
  groupStart: number[];
  predictor: number[];
  error: number[];
  dayOfYear: number[];
  templateValues: (number | null)[];
  templateStart: number[];
  templateDayOfYear: number[];
  neighbours?: NeighbourSettings;
  issueErrorEdges?: number[];
  leadScale?: number[];
  forcingPaths?: { nLeads: number; values: number[] };
}

export function archiveToJSON(a: ErrorArchive): ErrorArchiveJson {
  return {
    format: 1,
    transform: a.transform,
    nLeads: a.nLeads,
    templateLength: a.templateLength,
    groupStart: Array.from(a.groupStart),
    predictor: Array.from(a.predictor),
    error: Array.from(a.error),
    dayOfYear: Array.from(a.dayOfYear),
    templateValues: Array.from(a.templateValues, (v) => (Number.isNaN(v) ? null : v)),
    templateStart: Array.from(a.templateStart),
    templateDayOfYear: Array.from(a.templateDayOfYear),
    ...(a.neighbours ? { neighbours: a.neighbours } : {}),
    ...(a.issueErrorEdges ? { issueErrorEdges: Array.from(a.issueErrorEdges) } : {}),
    ...(a.leadScale ? { leadScale: Array.from(a.leadScale) } : {}),
    ...(a.forcingPaths ? { forcingPaths: { nLeads: a.forcingPaths.nLeads, values: Array.from(a.forcingPaths.values) } } : {}),
  };
}

export function archiveFromJSON(j: ErrorArchiveJson): ErrorArchive {
  const templateValues = Float64Array.from(j.templateValues, (v) => (v === null ? NaN : v));
  const a: ErrorArchive = {
    format: j.format,
    transform: j.transform,
    nLeads: j.nLeads,
    groupStart: Int32Array.from(j.groupStart),
    predictor: Float64Array.from(j.predictor),
    error: Float64Array.from(j.error),
    dayOfYear: Uint16Array.from(j.dayOfYear),
    templateLength: j.templateLength,
    templateValues,
    templateStart: Int32Array.from(j.templateStart),
    templateDayOfYear: Uint16Array.from(j.templateDayOfYear),
    templateRank: rankTemplateValues(templateValues, j.nLeads),
    ...(j.neighbours ? { neighbours: j.neighbours } : {}),
    ...(j.issueErrorEdges ? { issueErrorEdges: Float64Array.from(j.issueErrorEdges) } : {}),
    ...(j.leadScale ? { leadScale: Float64Array.from(j.leadScale) } : {}),
    ...(j.forcingPaths ? { forcingPaths: { nLeads: j.forcingPaths.nLeads, values: Float64Array.from(j.forcingPaths.values) } } : {}),
  };
  validateArchive(a);
  return a;
}
