// Trees, forest and LSTM on the demo gauge, side by side: the same calibration block trains
// each; the first 40 % of the validation block stops early (and gives each model's error
// archive); the last 60 % is scored — deterministic scores of the corrected members, then a
// simulation-mode hindcast (daily issues, 10 leads, the kNN + Schaake stage) verified by CRPS.
// Run: npx tsx bench/compare-residual-models.ts [--quick]
// Prints a table (the numbers in README.md come from it); nothing is asserted.
import { archiveToBytes } from '../src/core/stochastic/archive-codec.ts';
import type { FeatureSpec } from '../src/core/features/features.ts';
import { computeHindcast, type HindcastSettings } from '../src/models/hindcast-compute.ts';
import { fitLstmResidualModel } from '../src/models/lstm-fit.ts';
import { predictorFor } from '../src/models/model-shape.ts';
import { createResidualSession } from '../src/models/onnx-session.ts';
import type { Period } from '../src/core/archive-types.ts';
import { evaluateResidualModel } from '../src/models/residual-evaluation.ts';
import { fitResidualModel, splitValidation } from '../src/models/residual-fit.ts';
import type { ResidualSpec } from '../src/core/features/model-inputs.ts';
import { demoPeriods, demoSeries } from './demo-series.ts';

const quick = process.argv.includes('--quick');
const { series, scenario } = demoSeries();
const { calibration, validation } = demoPeriods(series);
// The fits split the validation block the same way (first 40 % by time stops early).
const { stopping, archive: scored } = splitValidation(validation, series.stepSeconds * 1000);
const iso = (p: Period) => `${new Date(p.fromMs).toISOString().slice(0, 10)} … ${new Date(p.toMs).toISOString().slice(0, 10)}`;
console.log(`demo gauge, ${series.members.length} members: calibration ${iso(calibration)}, stopping ${iso(stopping)}, scored ${iso(scored)}`);
const forcings = ['air_temperature', 'precipitation'];
const archiveOptions = { transform: { kind: 'log' as const }, templateLength: 30 };

interface Fitted {
  name: string;
  spec: ResidualSpec;
  parts: Uint8Array[];
  fitS: number;
  note: string;
}

async function fitTrees(trainer: 'gradient-boosting' | 'random-forest'): Promise<Fitted> {
  const t0 = performance.now();
  // The API's defaults for each trainer (src/api/models.ts), rows capped as the demo does.
  const params: Record<string, number> = trainer === 'gradient-boosting' ? { nRounds: 400, learningRate: 0.08, maxDepth: 5, patience: 30 } : { nTrees: quick ? 50 : 200, maxDepth: 10 };
  const r = await fitResidualModel(series, {
    calibration,
    validation,
    trainer,
    params,
    tuning: null,
    bundle: 1,
    seed: 1,
    simLags: 9,
    forcings: forcings.map((name) => ({ name, lags: 3 })),
    seasonal: true,
    ...archiveOptions,
    maxTrainRows: 40_000,
  });
  const spec: FeatureSpec = r.spec;
  return { name: trainer === 'gradient-boosting' ? 'trees (boosting)' : 'forest', spec, parts: r.parts.map((p) => p.onnx), fitS: (performance.now() - t0) / 1000, note: `${r.parts[0].model.trees.length} trees` };
}

async function fitLstm(): Promise<Fitted> {
  const t0 = performance.now();
  const r = await fitLstmResidualModel(series, {
    calibration,
    validation,
    params: {},
    tuning: null,
    seed: 1,
    forcings,
    seasonal: true,
    ...archiveOptions,
    maxTrainRows: 20_000,
    maxStopRows: 10_000,
  });
  const info = r.model.info as { epochs: number; bestEpoch: number };
  return { name: 'LSTM', spec: r.spec, parts: [r.onnx], fitS: (performance.now() - t0) / 1000, note: `hidden ${r.model.hidden}, window ${r.spec.window}, ${info.epochs} epochs (best ${info.bestEpoch})` };
}

const models: Fitted[] = [];
for (const fit of [() => fitTrees('gradient-boosting'), () => fitTrees('random-forest'), fitLstm]) {
  const m = await fit();
  console.log(`fitted ${m.name} in ${m.fitS.toFixed(1)} s (${m.note})`);
  models.push(m);
}

// Daily issues over the scored block (10 leads each), the same for every model.
const H = 10;
const issues: number[] = [];
for (let i = 0; i < series.times.length - H - 1; i++) if (series.times[i] >= scored.fromMs && series.times[i + H] < scored.toMs) issues.push(i);
const settings: HindcastSettings = {
  mode: 'simulation',
  horizon: H,
  seed: 1,
  nDraws: quick ? 100 : 300,
  seasonalWindowDays: 60,
  thresholds: scenario.gauge.thresholds.map((t) => t.value),
  leadRange: null,
  sizeStudy: { sources: [], sizes: [], repeats: 1, caseFraction: null, targetCases: 1000 },
};

const rows: string[][] = [];
for (const m of models) {
  const sessions = await Promise.all(m.parts.map((p) => createResidualSession(p)));
  const predictors = sessions.map((s) => predictorFor(s, m.spec));
  const onScored = await evaluateResidualModel(series, m.spec, scored, predictors, archiveOptions);
  // The stochastic stage's archive comes from the stopping block, so the hindcast is scored out of sample.
  const archive = (await evaluateResidualModel(series, m.spec, stopping, predictors, archiveOptions)).correctedArchive;
  await Promise.all(sessions.map((s) => s.release()));
  const t0 = performance.now();
  const h = await computeHindcast(
    { series, issueIndex: Int32Array.from(issues), reforecast: null, model: { spec: m.spec, parts: m.parts }, archive: archiveToBytes(archive), settings },
    () => {},
    () => false,
  );
  const rep = h.report;
  const s = onScored.scores;
  rows.push([
    m.name,
    m.fitS.toFixed(0),
    `${s.residualRmse.before.toFixed(3)} → ${s.residualRmse.after.toFixed(3)}`,
    `${s.ensembleMean.nseBefore.toFixed(3)} → ${s.ensembleMean.nseAfter.toFixed(3)}`,
    `${s.ensembleMean.kgeBefore.toFixed(3)} → ${s.ensembleMean.kgeAfter.toFixed(3)}`,
    rep.raw.crps.crps!.toFixed(3),
    rep.corrected.crps.crps!.toFixed(3),
    rep.stochastic?.crps.crps?.toFixed(3) ?? '–',
    rep.stochastic?.crps.fairCrps?.toFixed(3) ?? '–',
    rep.stochastic?.spread.class ?? '–',
  ]);
  console.log(`hindcast ${m.name}: ${h.issues.used} issues, ${h.cases} cases, ${((performance.now() - t0) / 1000).toFixed(1)} s`);
}

const header = ['model', 'fit s', 'residual RMSE m3/s (raw → corrected)', 'ens.-mean NSE', 'ens.-mean KGE', 'CRPS raw', 'CRPS corrected', 'CRPS stochastic', 'fair CRPS stoch.', 'stochastic spread'];
const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
const line = (r: string[]) => `| ${r.map((c, i) => c.padEnd(widths[i])).join(' | ')} |`;
console.log(`\nscored block ${iso(scored)}; hindcast ${issues.length} daily issues × ${H} leads, CRPS in m3/s (lower is better)\n`);
console.log(line(header));
console.log(`| ${widths.map((w) => '-'.repeat(w)).join(' | ')} |`);
for (const r of rows) console.log(line(r));
