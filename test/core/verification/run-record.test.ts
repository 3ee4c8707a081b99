// The verification record of a stored run (src/core/verification/run-record.ts): what goes in
// comes back out, per lead, in the form the verification reads. Expected values worked by hand.
import { describe, expect, it } from 'vitest';
import { buildRunRecord, decodeRunRecord, leadValues, packRecords, thresholdsKey, unpackRecord } from '../../../src/core/verification/run-record.ts';

const thresholds = [
  { label: 'bankfull', value: 10 },
  { label: 'flood', value: 20 },
];
const run = {
  validMs: [86_400_000, 2 * 86_400_000, 3 * 86_400_000],
  // Member 2 has no value at lead 2 (a shorter series): its trajectory is left out of the any-time share.
  raw: [{ values: [12, 9, 21] }, { values: [8, -0, 5] }, { values: [30, 11] }],
  corrected: [{ values: [9, 9.5, 19] }, { values: [11, 8, 25] }, { values: [NaN, 7, 6] }],
  percentiles: [
    [1.1, 2.2, 3.3],
    [4, 5, 6],
    [7, 8, 9],
  ],
  updated: true,
  issued: [
    { label: 'bankfull', value: 10, exceedance: [0.5, 0.25, 0.75], anyTime: 0.8 },
    { label: 'flood', value: 20, exceedance: [0, 0, 0.5], anyTime: 0.5 },
  ],
};

describe('run verification record', () => {
  it('keeps each lead ascending without missing values, the quantiles as float32, and the any-time shares of the trajectories', () => {
    const r = decodeRunRecord(buildRunRecord(run, thresholds));
    expect(r.nLeads).toBe(3);
    expect(Array.from(r.validMs)).toEqual(run.validMs);
    expect(r.updated).toBe(true);
    expect(r.hasCorrected).toBe(true);
    expect(r.issuedMatch).toBe(true);
    expect(Array.from(leadValues(r.raw, 0))).toEqual([8, 12, 30]);
    // −0 is kept as +0 (the sorts of the scores require it).
    expect(Object.is(leadValues(r.raw, 1)[0], 0)).toBe(true);
    expect(Array.from(leadValues(r.raw, 2))).toEqual([5, 21]);
    expect(Array.from(leadValues(r.corrected!, 0))).toEqual([9, 11]);
    expect(Array.from(leadValues(r.stochastic, 0))).toEqual([Math.fround(1.1), Math.fround(2.2), Math.fround(3.3)]);
    // Raw trajectories with every lead: members 0 and 1. Above 10 at some lead: member 0 only → 1/2;
    // above 20: member 0 (21) → 1/2. Corrected: member 2 has NaN at lead 0, so members 0 and 1:
    // above 10: member 1 (11) and member 0 (19) → 1; above 20: member 1 (25) → 1/2.
    expect(Array.from(r.anyTimeRaw)).toEqual([0.5, 0.5]);
    expect(Array.from(r.anyTimeCorrected)).toEqual([1, 0.5]);
    expect(Array.from(r.anyTimeIssued)).toEqual([0.8, 0.5]);
    expect(Array.from(r.exceedanceIssued)).toEqual([0.5, 0.25, 0.75, 0, 0, 0.5]);
  });

  it('marks a run issued with other thresholds, and a degraded run without corrected members', () => {
    const other = decodeRunRecord(buildRunRecord({ ...run, corrected: null }, [{ label: 'bankfull', value: 11 }]));
    expect(other.issuedMatch).toBe(false);
    expect(other.corrected).toBeNull();
    expect(Array.from(other.anyTimeIssued).every(Number.isNaN)).toBe(true);
    expect(thresholdsKey(thresholds)).not.toBe(thresholdsKey([{ label: 'bankfull', value: 11 }]));
  });

  it('packs many records into one buffer and reads each back', () => {
    const a = buildRunRecord(run, thresholds);
    const b = buildRunRecord({ ...run, updated: false }, thresholds);
    const p = packRecords([a, b]);
    expect(p.offsets[1] % 8).toBe(0);
    expect(unpackRecord(p, 0).updated).toBe(true);
    expect(unpackRecord(p, 1).updated).toBe(false);
    // Read back from an unaligned copy too (a driver's buffer may sit at any offset).
    const shifted = new Uint8Array(a.byteLength + 3);
    shifted.set(a, 3);
    expect(Array.from(leadValues(decodeRunRecord(shifted.subarray(3)).raw, 0))).toEqual([8, 12, 30]);
  });
});
