// One definition of the corrected member (src/core/correction/corrected-member.ts) for a two-model bundle where
// clipping at zero bites: serving, the lead-free error archive, the per-lead error archive and the
// hindcast must all see the same member values. The numbers are worked by hand (no outside source
// needed): simulated 2 m3/s with residuals −5 and +1 gives per-model values max(0, −3) = 0 and
// max(0, 3) = 3, so the bundle's member is (0 + 3)/2 = 1.5; clipping the mean instead would give
// max(0, 2 + (−5 + 1)/2) = 0.
import { describe, expect, it } from 'vitest';
import type { ArchiveSeries, ReforecastSet } from '../../src/core/archive-types.ts';
import { correctedMember } from '../../src/core/correction/corrected-member.ts';
import { makeFeatureSpec } from '../../src/core/features/features.ts';
import { createStochasticWorkspace } from '../../src/core/stochastic/stochastic-stage.ts';
import { correctRun } from '../../src/models/correct-run.ts';
import { computeHindcast } from '../../src/models/hindcast-compute.ts';
import { treeModelToOnnx } from '../../src/models/onnx-export.ts';
import { createResidualSession } from '../../src/models/onnx-session.ts';
import { evaluateReforecasts } from '../../src/models/reforecast-evaluation.ts';
import { evaluateResidualModel, type ResidualPredictor } from '../../src/models/residual-evaluation.ts';
import type { TreeModel } from '../../src/models/trees/types.ts';
import { archiveToBytes } from '../../src/core/stochastic/archive-codec.ts';

const DAY = 86_400_000;
const T0 = Date.UTC(2020, 0, 1);
const N = 400;
const SIMULATED = 2;
const RESIDUALS = [-5, 1];
const BUNDLE_MEMBER = 1.5;

// One member simulated at a constant 2 m3/s; observations vary around 1.5 so the archives have errors.
const series: ArchiveSeries = {
  stepSeconds: 86400,
  times: Float64Array.from({ length: N }, (_, i) => T0 + i * DAY),
  observed: Float64Array.from({ length: N }, (_, i) => 1.5 + 0.5 * Math.sin(i / 7)),
  forcings: {},
  members: [{ id: 'm1', values: new Float64Array(N).fill(SIMULATED) }],
};
const spec = makeFeatureSpec({ stepSeconds: 86400, simLags: 0, forcings: [], seasonal: false });
const validation = { fromMs: T0 + 100 * DAY, toMs: T0 + N * DAY };
const constant = (v: number): ResidualPredictor => async (_rows, n) => new Float32Array(n).fill(v);

/** A tree model that predicts `v` for every row: one split whose two leaves both hold v. */
function constantTree(v: number, nFeatures: number): TreeModel {
  return {
    format: 'tree-ensemble/1',
    kind: 'gradient-boosting',
    nFeatures,
    baseScore: 0,
    trees: [{ feature: [0, -1, -1], threshold: [0, 0, 0], left: [1, -1, -1], right: [2, -1, -1], missingLeft: [1, 0, 0], value: [0, v, v], gain: [0, 0, 0], cover: [1, 1, 1] }],
    info: { seed: 1, params: {}, roundsTrained: 1, bestIteration: -1, stopReason: 'rounds', validRmse: [], trainRmse: 0 },
  };
}

describe('the corrected member of a two-model bundle where clipping at zero bites', () => {
  it('clips each model first, then averages', () => {
    expect(RESIDUALS.map((r) => correctedMember(SIMULATED, r))).toEqual([0, 3]);
    expect(Number.isNaN(correctedMember(NaN, 1))).toBe(true);
  });

  it('the lead-free error archive holds the clip-then-average member', async () => {
    const e = await evaluateResidualModel(series, spec, validation, RESIDUALS.map(constant), { transform: { kind: 'none' }, templateLength: 10 });
    // predictor[i] is the corrected flow of case i (src/core/stochastic/error-archive.ts).
    expect(e.correctedArchive.predictor.length).toBeGreaterThan(200);
    expect(new Set(e.correctedArchive.predictor)).toEqual(new Set([BUNDLE_MEMBER]));
  });

  it('the per-lead error archive holds the same member', async () => {
    const nIssues = 40;
    const nLeads = 3;
    const issueTimes = Float64Array.from({ length: nIssues }, (_, s) => T0 + (150 + 5 * s) * DAY);
    const set: ReforecastSet = { issueTimes, nLeads, memberIds: ['m1'], values: new Float64Array(nIssues * nLeads).fill(SIMULATED) };
    const e = await evaluateReforecasts(series, set, spec, RESIDUALS.map(constant), { transform: { kind: 'none' } });
    expect(e.archives, e.reason ?? '').not.toBeNull();
    expect(new Set(e.archives!.corrected.predictor)).toEqual(new Set([BUNDLE_MEMBER]));
  });

  it('serving reports the same member, and the hindcast scores the same member', async () => {
    const nF = 1;
    const parts = RESIDUALS.map((r) => treeModelToOnnx(constantTree(r, nF), { nFeatures: nF }));
    const sessions = await Promise.all(parts.map((p) => createResidualSession(p)));
    const archive = (await evaluateResidualModel(series, spec, validation, RESIDUALS.map(constant), { transform: { kind: 'none' }, templateLength: 10 })).correctedArchive;
    try {
      const H = 3;
      const run = { issueTime: T0 + 300 * DAY, nLeads: H, members: [new Float64Array(H + 1).fill(SIMULATED)], forcings: {}, issueObservation: null };
      const out = await correctRun(run, spec, sessions, archive, { stepSeconds: 86400, seed: 1, nDraws: 50, probs: [0.5], thresholds: [], seasonalWindowDays: null }, createStochasticWorkspace());
      expect(Array.from(out.corrected!)).toEqual(new Array(H).fill(BUNDLE_MEMBER));
    } finally {
      await Promise.all(sessions.map((s) => s.release()));
    }

    const issueIndex = Int32Array.from({ length: 20 }, (_, s) => 200 + 5 * s);
    const hindcast = await computeHindcast(
      {
        series,
        issueIndex,
        reforecast: null,
        model: { spec, parts },
        archive: archiveToBytes(archive),
        settings: { mode: 'simulation', horizon: 3, seed: 1, nDraws: 50, seasonalWindowDays: null, thresholds: [], leadRange: null, sizeStudy: { sources: [], sizes: [], repeats: 1, caseFraction: null, targetCases: 1000 } },
      },
      () => {},
      () => false,
    );
    // The corrected column is one value per member per case: its median is the member itself.
    expect(hindcast.report.corrected!.n).toBeGreaterThan(0);
    expect(hindcast.report.corrected!.mean.bias).toBeCloseTo(BUNDLE_MEMBER - meanObserved(issueIndex, 3), 10);
  });
});

function meanObserved(issueIndex: Int32Array, H: number): number {
  let s = 0;
  let n = 0;
  for (const i of issueIndex) for (let h = 1; h <= H; h++) {
    s += series.observed[i + h];
    n++;
  }
  return s / n;
}
