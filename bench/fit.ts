// Training speed and accuracy of the in-house gradient boosting against xgboost's 'hist' method
// (Debian python3-xgboost, /usr/bin/python3) on the very same synthetic data.
// Run: npx tsx bench/fit.ts [--skip-xgboost]
// Goal: training time within 3× xgboost with nthread=1, validation RMSE at most 2 % worse.

import { execFileSync } from 'node:child_process';
import { mkdtempSync, writeFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createPrng } from '../src/core/prng.ts';
import { trainGradientBoosting } from '../src/models/trees/index.ts';
import { predictTrees } from '../src/models/trees/index.ts';

const N_ROWS = 100_000;
const N_FEATURES = 40;
const N_TRAIN = 80_000; // 20 % validation
const NOISE_SD = 0.5;

/** Seeded synthetic regression data: nonlinear in 10 features with interactions, 30 distractors. */
function makeData(seed: number): { x: Float32Array; y: Float32Array } {
  const rng = createPrng(seed);
  const x = new Float32Array(N_ROWS * N_FEATURES);
  const y = new Float32Array(N_ROWS);
  for (let r = 0; r < N_ROWS; r++) {
    const o = r * N_FEATURES;
    for (let f = 0; f < N_FEATURES; f++) {
      // Mix of shapes: normal, uniform, skewed (like flows), and a few correlated pairs.
      const kind = f % 4;
      let v: number;
      if (kind === 0) v = rng.normal();
      else if (kind === 1) v = 4 * rng.nextFloat() - 2;
      else if (kind === 2) v = Math.exp(0.8 * rng.normal()) - 1;
      else v = 0.7 * x[o + f - 3] + 0.3 * rng.normal();
      x[o + f] = v;
    }
    const a = (f: number): number => x[o + f];
    const signal =
      2 * Math.sin(a(0)) +
      0.5 * a(1) * a(1) +
      a(2) * a(4) * 0.5 +
      Math.abs(a(5)) +
      (a(6) > 0 ? a(7) : -a(7)) +
      0.5 * Math.cos(3 * a(8)) +
      Math.log1p(Math.max(a(10), -0.9) + 1) +
      0.3 * a(9) * a(13);
    y[r] = signal + NOISE_SD * rng.normal();
  }
  return { x, y };
}

function rmse(pred: ArrayLike<number>, y: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < y.length; i++) s += (pred[i] - y[i]) ** 2;
  return Math.sqrt(s / y.length);
}

const { x, y } = makeData(20240601);
const xTrain = x.subarray(0, N_TRAIN * N_FEATURES);
const yTrain = y.subarray(0, N_TRAIN);
const xValid = x.subarray(N_TRAIN * N_FEATURES);
const yValid = y.subarray(N_TRAIN);
const nValid = N_ROWS - N_TRAIN;

const c0 = process.cpuUsage();
const t0 = performance.now();
const model = trainGradientBoosting(
  { x: xTrain, nRows: N_TRAIN, nFeatures: N_FEATURES, y: yTrain, valid: { x: xValid, nRows: nValid, y: yValid } },
  // patience 0: all 300 rounds, like the xgboost run (validation is scored every round in both).
  { nRounds: 300, maxDepth: 6, learningRate: 0.1, lambda: 1, gamma: 0, minChildWeight: 1, maxBins: 255, patience: 0 },
  1,
);
const seconds = (performance.now() - t0) / 1000;
const cpu = process.cpuUsage(c0);
const cpuSeconds = (cpu.user + cpu.system) / 1e6;
const ours = rmse(predictTrees(model, xValid, nValid), yValid);

const rows: { method: string; seconds: number; cpuSeconds: number; rmse: number }[] = [
  { method: 'in-house GBT (TypeScript, 1 thread)', seconds, cpuSeconds, rmse: ours },
];

if (!process.argv.includes('--skip-xgboost')) {
  const dir = mkdtempSync(join(tmpdir(), 'fit-bench-'));
  try {
    const file = join(dir, 'data.bin');
    const header = new Int32Array([N_ROWS, N_FEATURES, N_TRAIN]);
    writeFileSync(file, Buffer.concat([
      Buffer.from(header.buffer),
      Buffer.from(x.buffer, x.byteOffset, x.byteLength),
      Buffer.from(y.buffer, y.byteOffset, y.byteLength),
    ]));
    const out = execFileSync('/usr/bin/python3', ['bench/fit_xgboost.py', file], { encoding: 'utf8' });
    for (const line of out.trim().split('\n')) {
      const r = JSON.parse(line) as { nthread: number; seconds: number; cpuSeconds: number; rmse: number; xgboost: string };
      rows.push({ method: `xgboost ${r.xgboost} hist, nthread=${r.nthread}`, seconds: r.seconds, cpuSeconds: r.cpuSeconds, rmse: r.rmse });
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

console.log(`GBT fit: ${N_TRAIN} train + ${nValid} validation rows × ${N_FEATURES} features, 300 trees, depth 6, eta 0.1, noise sd ${NOISE_SD}`);
console.log('method                                   wall s    CPU s   valid RMSE   wall ratio   CPU ratio   RMSE ratio');
for (const r of rows) {
  const first = r === rows[0];
  const wr = first ? '' : (rows[0].seconds / r.seconds).toFixed(2);
  const cr = first ? '' : (rows[0].cpuSeconds / r.cpuSeconds).toFixed(2);
  const rr = first ? '' : (rows[0].rmse / r.rmse).toFixed(4);
  console.log(
    `${r.method.padEnd(40)} ${r.seconds.toFixed(2).padStart(6)}   ${r.cpuSeconds.toFixed(2).padStart(6)}   ${r.rmse.toFixed(5).padStart(10)}   ${wr.padStart(10)}   ${cr.padStart(9)}   ${rr.padStart(10)}`,
  );
}
console.log('ratios = ours / xgboost. Goal: time ratio <= 3 against nthread=1, RMSE ratio <= 1.02.');
console.log('CPU s counts all threads; on a busy machine the CPU ratio is the steadier figure.');
