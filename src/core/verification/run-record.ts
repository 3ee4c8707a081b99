import { warningRunFromStored } from './stored-run-warnings.ts';
import { anyTimeShare } from './warning-verification.ts';

/**
 * The verification record of one stored run: what the verification of stored runs reads of it,
 * kept in a compact binary form so a verification never parses the run's JSON answer again.
 * It holds only what does not depend on the observations — the raw and corrected members per
 * lead, finite values ascending; the stage's quantiles per lead as stored (float32, as the run's
 * percentiles column keeps them); the any-time probabilities of the raw and corrected
 * trajectories per threshold; the issued exceedance and any-time probabilities — so a revised
 * observation can never leave a record stale: every score that reads an observation is computed
 * when asked (src/core/verification/stored-verification.ts).
 *
 * The any-time shares and the issued-threshold check depend on the gauge's thresholds, so a
 * record is built for one threshold set (thresholdsKey) and rebuilt when the gauge's change.
 */
export const RUN_RECORD_FORMAT = 1;

/** What a record is built from: one stored run as src/store/verification-repo.ts reads it. */
export interface RunRecordInput {
  /** Valid time of each lead (epoch ms). */
  validMs: ArrayLike<number>;
  raw: readonly { values: readonly (number | null)[] }[];
  corrected: readonly { values: readonly (number | null)[] }[] | null;
  /** Per lead, the stage's quantiles at the midpoint levels. */
  percentiles: readonly (readonly number[])[];
  updated: boolean;
  issued: readonly { label: string; value: number; exceedance: readonly number[]; anyTime: number }[] | null;
}

/** Values per lead: lead k is values[start[k] … start[k + 1] − 1]. */
export interface LeadColumns {
  values: Float64Array;
  start: Int32Array;
}

export interface RunRecord {
  nLeads: number;
  validMs: Float64Array;
  updated: boolean;
  hasCorrected: boolean;
  /** The run was issued with exactly the thresholds the record was built for (labels and values). */
  issuedMatch: boolean;
  /** Finite values ascending. */
  raw: LeadColumns;
  /** Finite values ascending; null for a run without corrected members (degraded). */
  corrected: LeadColumns | null;
  /** As stored (the quantiles' order), non-finite values kept. */
  stochastic: LeadColumns;
  /** Every stage quantile is finite. */
  stochasticFinite: boolean;
  /** Per threshold: share of raw / corrected trajectories above it at some lead (NaN without any complete one). */
  anyTimeRaw: Float64Array;
  anyTimeCorrected: Float64Array;
  /** As issued: any-time per threshold and exceedance [threshold·nLeads + lead]; NaN when not issued with these thresholds. */
  anyTimeIssued: Float64Array;
  exceedanceIssued: Float64Array;
}

/** The key of a threshold set (labels and values, in order); stored as text, so no NUL in it. */
export function thresholdsKey(ts: readonly { label: string; value: number }[]): string {
  return JSON.stringify(ts.map((t) => [t.label, t.value]));
}

const HEADER = 8;

/** Builds the record of one run for the gauge's thresholds; returns its bytes. */
export function buildRunRecord(r: RunRecordInput, thresholds: readonly { label: string; value: number }[]): Uint8Array {
  const H = r.validMs.length;
  const T = thresholds.length;
  const issuedMatch = r.issued !== null && thresholdsKey(r.issued) === thresholdsKey(thresholds);
  const sortedColumns = (list: readonly { values: readonly (number | null)[] }[]) => {
    const start = new Int32Array(H + 1);
    const out: number[] = [];
    const col: number[] = [];
    for (let k = 0; k < H; k++) {
      col.length = 0;
      for (const m of list) {
        const v = m.values[k];
        if (v !== null && v !== undefined && Number.isFinite(v)) col.push(v + 0); // −0 → +0
      }
      col.sort((a, b) => a - b);
      for (const v of col) out.push(v);
      start[k + 1] = out.length;
    }
    return { values: out, start };
  };
  const raw = sortedColumns(r.raw);
  const cor = r.corrected ? sortedColumns(r.corrected) : null;
  const stStart = new Int32Array(H + 1);
  for (let k = 0; k < H; k++) stStart[k + 1] = stStart[k] + (r.percentiles[k]?.length ?? 0);
  // The any-time shares of the trajectories, exactly as the warning verification takes them from a stored run.
  const asRun = warningRunFromStored(
    { issueMs: 0, validMs: r.validMs, raw: r.raw as { values: number[] }[], corrected: (r.corrected ?? []) as { values: number[] }[], percentiles: [], thresholds: [] },
    () => NaN,
    NaN,
  );
  const share = (s: number) => Float64Array.from(thresholds, (t) => anyTimeShare(asRun.sources[s], H, t.value));
  const anyRaw = share(0);
  const anyCor = r.corrected ? share(1) : new Float64Array(T).fill(NaN);
  const anyIssued = new Float64Array(T).fill(NaN);
  const excIssued = new Float64Array(T * H).fill(NaN);
  if (issuedMatch) {
    r.issued!.forEach((t, i) => {
      for (let k = 0; k < H; k++) excIssued[i * H + k] = t.exceedance[k] ?? NaN;
      anyIssued[i] = t.anyTime ?? NaN;
    });
  }
  // Float64 part: header, valid times, three start arrays, any-time and exceedance, raw and corrected values; then float32 quantiles.
  const n64 = HEADER + H + 3 * (H + 1) + 3 * T + T * H + raw.values.length + (cor ? cor.values.length : 0);
  const buf = new ArrayBuffer(n64 * 8 + stStart[H] * 4);
  const f = new Float64Array(buf, 0, n64);
  f.set([RUN_RECORD_FORMAT, H, T, r.updated ? 1 : 0, cor ? 1 : 0, issuedMatch ? 1 : 0, raw.values.length, cor ? cor.values.length : 0]);
  let o = HEADER;
  const put = (a: ArrayLike<number>) => {
    f.set(a, o);
    o += a.length;
  };
  put(Float64Array.from(r.validMs));
  put(raw.start);
  put(cor ? cor.start : new Int32Array(H + 1));
  put(stStart);
  put(anyRaw);
  put(anyCor);
  put(anyIssued);
  put(excIssued);
  put(raw.values);
  if (cor) put(cor.values);
  const q = new Float32Array(buf, n64 * 8, stStart[H]);
  for (let k = 0; k < H; k++) q.set(r.percentiles[k] ?? [], stStart[k]);
  return new Uint8Array(buf);
}

/** Reads a record (the bytes may sit at any offset; they are copied once when unaligned). */
export function decodeRunRecord(bytes: Uint8Array): RunRecord {
  const b = bytes.byteOffset % 8 === 0 ? bytes : new Uint8Array(bytes);
  const head = new Float64Array(b.buffer, b.byteOffset, HEADER);
  if (head[0] !== RUN_RECORD_FORMAT) throw new RangeError(`run record format ${head[0]} is not ${RUN_RECORD_FORMAT}`);
  const H = head[1];
  const T = head[2];
  const nRaw = head[6];
  const nCor = head[7];
  const n64 = HEADER + H + 3 * (H + 1) + 3 * T + T * H + nRaw + nCor;
  const f = new Float64Array(b.buffer, b.byteOffset, n64);
  let o = HEADER;
  const take = (n: number) => f.subarray(o, (o += n));
  const validMs = take(H);
  const rawStart = Int32Array.from(take(H + 1));
  const corStart = Int32Array.from(take(H + 1));
  const stStart = Int32Array.from(take(H + 1));
  const anyTimeRaw = take(T);
  const anyTimeCorrected = take(T);
  const anyTimeIssued = take(T);
  const exceedanceIssued = take(T * H);
  const rawValues = take(nRaw);
  const corValues = take(nCor);
  // Widened to float64 once here (exact), so every score reads one array type.
  const q = Float64Array.from(new Float32Array(b.buffer, b.byteOffset + n64 * 8, stStart[H]));
  let stochasticFinite = true;
  for (let i = 0; i < q.length && stochasticFinite; i++) stochasticFinite = Number.isFinite(q[i]);
  return {
    nLeads: H,
    validMs,
    updated: head[3] === 1,
    hasCorrected: head[4] === 1,
    issuedMatch: head[5] === 1,
    raw: { values: rawValues, start: rawStart },
    corrected: head[4] === 1 ? { values: corValues, start: corStart } : null,
    stochastic: { values: q, start: stStart },
    stochasticFinite,
    anyTimeRaw,
    anyTimeCorrected,
    anyTimeIssued,
    exceedanceIssued,
  };
}

/** Lead k's values of one source. */
export function leadValues(c: LeadColumns, k: number): Float64Array {
  return c.values.subarray(c.start[k], c.start[k + 1]);
}

/** Many records in one buffer (each at an offset that is a multiple of 8), to hand to a worker thread in one transfer. */
export interface PackedRecords {
  bytes: Uint8Array;
  /** Record i is bytes[offsets[i] … offsets[i] + lengths[i] − 1]. */
  offsets: Float64Array;
  lengths: Float64Array;
}

export function packRecords(list: readonly Uint8Array[]): PackedRecords {
  const offsets = new Float64Array(list.length);
  const lengths = new Float64Array(list.length);
  let n = 0;
  list.forEach((b, i) => {
    offsets[i] = n;
    lengths[i] = b.byteLength;
    n += Math.ceil(b.byteLength / 8) * 8;
  });
  const bytes = new Uint8Array(n);
  list.forEach((b, i) => bytes.set(b, offsets[i]));
  return { bytes, offsets, lengths };
}

export function unpackRecord(p: PackedRecords, i: number): RunRecord {
  return decodeRunRecord(p.bytes.subarray(p.offsets[i], p.offsets[i] + p.lengths[i]));
}
