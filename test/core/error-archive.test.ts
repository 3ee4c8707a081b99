import { describe, expect, it } from 'vitest';
import { buildArchiveFromReforecasts, buildArchiveFromSeries, MISSING_RANK, validateArchive, archiveBuffers } from '../../src/core/stochastic/error-archive.ts';
import { archiveFromBytes, archiveFromJSON, archiveToBytes, archiveToJSON } from '../../src/core/stochastic/archive-codec.ts';
import { forwardTransform, inverseTransform, resolveTransform } from '../../src/core/stochastic/error-transform.ts';
import { runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';
import { createPrng } from '../../src/core/prng.ts';

function smallSeries() {
  const corrected = [5, 3, 8, null, 2, 9, 4, 6, 7, 1];
  const observed = [6, 3, 7, 4, null, 10, 4, 8, 6, 1];
  const dayOfYear = [360, 361, 362, 363, 364, 365, 1, 2, 3, 4];
  return { corrected, observed, dayOfYear };
}

describe('error archive', () => {
  it('builds a lead-free archive from a series: cases sorted by predictor, windows without gaps', () => {
    const a = buildArchiveFromSeries({ ...smallSeries(), templateLength: 3 });
    expect(a.nLeads).toBe(0);
    expect(Array.from(a.groupStart)).toEqual([0, 8]);
    expect(Array.from(a.predictor)).toEqual([1, 3, 4, 5, 6, 7, 8, 9]);
    expect(Array.from(a.error)).toEqual([0, 0, 0, 1, 2, -1, -1, 1]);
    expect(Array.from(a.dayOfYear)).toEqual([4, 361, 1, 360, 2, 3, 362, 365]);
    // Steps 3 (corrected missing) and 4 (observed missing) break windows: starts 0 and 5, 6, 7.
    expect(Array.from(a.templateStart)).toEqual([0, 5, 6, 7]);
    expect(Array.from(a.templateDayOfYear)).toEqual([360, 365, 1, 2]);
    expect(a.templateRank[3]).toBe(MISSING_RANK);
    validateArchive(a);
    const strided = buildArchiveFromSeries({ ...smallSeries(), templateLength: 3, templateStride: 2 });
    expect(Array.from(strided.templateStart)).toEqual([0, 6]);
  });

  it('builds a reforecast archive: one group per lead, complete issues as templates', () => {
    // 3 issues × 2 leads; issue 1 misses an observation at lead 1.
    const a = buildArchiveFromReforecasts({
      nIssues: 3,
      nLeads: 2,
      corrected: [10, 11, 20, 21, 5, 6],
      observed: [12, 10, 19, null, 5, 9],
      dayOfYear: [100, 101, 107, 108, 114, 115],
    });
    expect(a.nLeads).toBe(2);
    expect(Array.from(a.groupStart)).toEqual([0, 3, 5]);
    expect(Array.from(a.predictor)).toEqual([5, 10, 20, 6, 11]);
    expect(Array.from(a.error)).toEqual([0, 2, -1, 3, -1]);
    expect(Array.from(a.templateStart)).toEqual([0, 4]);
    expect(Array.from(a.templateDayOfYear)).toEqual([100, 114]);
    validateArchive(a);
  });

  it('round-trips through bytes and JSON exactly, and the stage gives identical results', () => {
    const g = createPrng(5);
    const S = 400;
    const corrected = Float64Array.from({ length: S }, (_, i) => 20 + 10 * Math.sin(i / 20) + g.nextFloat());
    const observed = Array.from(corrected, (c, i) => (i % 37 === 0 ? null : c * Math.exp(0.1 * g.normal())));
    const dayOfYear = Array.from({ length: S }, (_, i) => (i % 365) + 1);
    const a = buildArchiveFromSeries({ corrected, observed, dayOfYear, templateLength: 10, transform: { kind: 'log' } });
    const bytes = archiveToBytes(a);
    // Through a Node Buffer at an odd offset, as a database driver may hand it back.
    const copy = Buffer.concat([Buffer.from([1, 2, 3]), Buffer.from(bytes)]).subarray(3);
    const b = archiveFromBytes(copy);
    const c = archiveFromJSON(JSON.parse(JSON.stringify(archiveToJSON(a))));
    for (const x of [b, c]) {
      expect(x.transform).toEqual(a.transform);
      for (const key of ['groupStart', 'predictor', 'error', 'dayOfYear', 'templateStart', 'templateDayOfYear', 'templateRank'] as const) {
        expect(Array.from(x[key]), key).toEqual(Array.from(a[key]));
      }
      expect(Array.from(x.templateValues).map(String)).toEqual(Array.from(a.templateValues).map(String));
    }
    const input = { members: Float64Array.from({ length: 3 * 10 }, () => 25 * g.nextFloat()), nMembers: 3, nLeads: 10 };
    const opts = { seed: 9, nDraws: 200, thresholds: [20, 30] };
    const r1 = runStochasticStage(a, input, opts);
    const r2 = runStochasticStage(b, input, opts);
    expect(Array.from(r2.quantiles)).toEqual(Array.from(r1.quantiles));
    expect(Array.from(r2.exceedanceAnyTime)).toEqual(Array.from(r1.exceedanceAnyTime));
    expect(bytes.length).toBeLessThan(12 + 200 + 18 * a.predictor.length + 8 * S + 6 * a.templateStart.length + 64);
    expect(archiveBuffers(a)).toHaveLength(8);
  });

  it('rejects corrupted archives', () => {
    const a = buildArchiveFromSeries({ ...smallSeries(), templateLength: 3 });
    const bytes = archiveToBytes(a);
    const bad = bytes.slice();
    bad[0] = 0;
    expect(() => archiveFromBytes(bad)).toThrow(/magic/);
    expect(() => archiveFromBytes(bytes.subarray(0, bytes.length - 16))).toThrow();
    const j = archiveToJSON(a);
    j.predictor[0] = 100; // breaks the sort order
    expect(() => archiveFromJSON(j)).toThrow(/sorted/);
  });

  it('transforms: log and Box–Cox invert exactly and clip at zero', () => {
    const log = resolveTransform({ kind: 'log' }, [100, 300, null]);
    expect(log).toEqual({ kind: 'log', offset: 2 }); // 1 % of the mean observed flow
    const bc = resolveTransform({ kind: 'boxcox', lambda: 0.3, offset: 0.1 }, []);
    for (const t of [log, bc, { kind: 'none' } as const]) {
      for (const x of [0, 0.5, 3, 250]) expect(inverseTransform(t, forwardTransform(t, x))).toBeCloseTo(x, 10);
      expect(inverseTransform(t, forwardTransform(t, 0) - 5)).toBe(0);
    }
    expect(forwardTransform({ kind: 'none' }, -3)).toBe(0);
    expect(() => resolveTransform({ kind: 'boxcox', lambda: -0.5 }, [1])).toThrow(/lambda/);
  });
});
