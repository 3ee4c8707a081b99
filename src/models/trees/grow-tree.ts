// Grows one regression tree on binned features from per-row gradients g and hessians h
// (second-order boosting, xgboost-style: leaf = −G/(H+λ), split gain
// GL²/(HL+λ) + GR²/(HR+λ) − G²/(H+λ)). The random forest uses the same code with g = −y·w,
// h = w, λ = 0, where the gain is the drop in squared error and the leaf is the weighted mean.
// A split is made when its gain is >= gamma and both children have summed h >= minChildWeight
// (as xgboost's hist method decides it, so small cases can be checked against xgboost exactly).
// Missing values: each split also tries sending the node's missing rows left, and keeps the better.
//
// Histograms: one (g, h) pair per bin per feature, Float64Array laid out as
// [feature][256 bins][g, h] (bin 255 = missing). With all of the tree's features at every split
// (boosting) only the smaller child's histogram is built from rows; the larger child's is the
// parent's minus the smaller (the subtraction trick). Nodes are split depth-first so that at most
// maxDepth + 1 histograms are alive at once.
//
// With threads = 2 a helper thread (hist-helper.ts) takes the second half of the tree's features:
// it builds, subtracts and scans their histograms while this thread does the first half, over
// shared memory. Each feature's histogram is summed in the same row order on either thread, and
// the two halves' best splits combine as one scan would (the later half wins only when strictly
// better), so the trees are identical to those grown on one thread.

import { Worker } from 'node:worker_threads';
import { MISSING_CODE, type BinnedFeatures } from './quantile-bins.ts';
import type { Prng } from '../../core/prng.ts';
import {
  buildHistRange,
  findSplitRange,
  REL_EPS,
  SLOTS,
  SPLIT_BIN,
  SPLIT_FEATURE,
  SPLIT_FIELDS,
  SPLIT_GL,
  SPLIT_HL,
  SPLIT_MISSING_LEFT,
  SPLIT_SCORE,
  subtractHistRange,
  type HistData,
} from './hist-kernels.ts';
import * as P from './hist-protocol.ts';

/** Nodes with fewer rows than this are done on one thread: waking the helper would cost more. */
const PARALLEL_MIN_ROWS = 2048;

export interface GrowOptions {
  maxDepth: number;
  lambda: number;
  gamma: number;
  minChildWeight: number;
  /** Multiplies every leaf value (learning rate, or 1/nTrees for a forest). */
  leafScale: number;
  /** Features this tree may split on. */
  treeFeatures: Int32Array;
  /** > 0: draw this many of treeFeatures afresh for every split (forest); 0: use all of them. */
  mtry: number;
  /** Every row's h is 1 (squared error without weights): histograms skip loading h. */
  unitHessian: boolean;
  rng: Prng;
}

/** Tree under construction; node arrays grow as nodes are created (root = 0). */
export interface WorkTree {
  feature: number[];
  bin: number[];
  missingLeft: number[];
  left: number[];
  right: number[];
  value: number[];
  gain: number[];
  cover: number[];
  /** Row positions [begin, end) of every node in the rows array after growing. */
  begin: number[];
  end: number[];
}

/** Reusable buffers sized for the training rows; one per training run (close() it when threads > 1). */
export class TreeGrower {
  readonly rows: Int32Array;
  /** Gradient and hessian per row id (filled by the caller before grow). */
  readonly g: Float64Array;
  readonly h: Float64Array;
  private readonly codes: Uint8Array;
  private readonly tmpRows: Int32Array;
  private readonly pool: Float64Array[] = [];
  private readonly nBins: Int32Array;
  private readonly featBuf: Int32Array;
  private readonly goLeft = new Uint8Array(256);
  private readonly split = new Float64Array(SPLIT_FIELDS);
  private unitHessian = false;
  private readonly histData: HistData;
  private readonly histSize: number;
  /** The helper thread and the shared memory it works on; null on one thread. */
  private helper: {
    worker: Worker;
    start: P.HelperStart;
    /** Index in the arena of each shared histogram. */
    index: Map<Float64Array, number>;
    seq: number;
    /** The features of the tree being grown are in start.feats. */
    treeFeatures: Int32Array | null;
  } | null = null;

  /**
   * threads = 2 starts a helper thread that shares the histogram work (falls back to one thread,
   * silently, if it does not start within a minute). histograms: how many a tree may hold at once
   * (maxDepth + 2 suffice); more are made unshared, and their nodes grown on one thread.
   */
  constructor(readonly data: BinnedFeatures, threads = 1, histograms = 33) {
    const n = data.nRows;
    const shared = threads > 1;
    const buffer = (bytes: number) => (shared ? new SharedArrayBuffer(bytes) : new ArrayBuffer(bytes));
    this.rows = new Int32Array(buffer(4 * n));
    this.g = new Float64Array(buffer(8 * n));
    this.h = new Float64Array(buffer(8 * n));
    this.codes = shared ? new Uint8Array(buffer(data.codes.length)) : data.codes;
    if (shared) this.codes.set(data.codes);
    this.tmpRows = new Int32Array(n);
    this.nBins = new Int32Array(data.nFeatures);
    for (let f = 0; f < data.nFeatures; f++) this.nBins[f] = data.cuts[f].length + 1;
    this.featBuf = new Int32Array(data.nFeatures);
    this.histSize = data.nFeatures * SLOTS;
    this.histData = { codes: this.codes, nRows: n, rows: this.rows, g: this.g, h: this.h, nBins: this.nBins };
    if (shared) this.startHelper(histograms);
  }

  private startHelper(histograms: number): void {
    const arena = new Float64Array(new SharedArrayBuffer(8 * histograms * this.histSize));
    const start: P.HelperStart = {
      ...this.histData,
      arena,
      histSize: this.histSize,
      feats: new Int32Array(new SharedArrayBuffer(4 * Math.max(1, this.data.nFeatures))),
      control: new Int32Array(new SharedArrayBuffer(4 * P.CONTROL_SIZE)),
      numbers: new Float64Array(new SharedArrayBuffer(8 * 8)),
      split: new Float64Array(new SharedArrayBuffer(8 * SPLIT_FIELDS)),
    };
    const worker = new Worker(new URL('./hist-helper-entry.mjs', import.meta.url), { workerData: start });
    worker.unref();
    // The trainers are synchronous: wait here for the helper to say it is ready.
    if (Atomics.wait(start.control, P.READY, 0, 60_000) === 'timed-out' && Atomics.load(start.control, P.READY) === 0) {
      void worker.terminate();
      return;
    }
    const index = new Map<Float64Array, number>();
    for (let i = 0; i < histograms; i++) {
      const hist = arena.subarray(i * this.histSize, (i + 1) * this.histSize);
      index.set(hist, i);
      this.pool.push(hist);
    }
    this.helper = { worker, start, index, seq: 0, treeFeatures: null };
  }

  /** Stops the helper thread (a no-op on one thread). */
  close(): void {
    const hp = this.helper;
    if (!hp) return;
    this.helper = null;
    hp.start.control[P.OP] = P.OP_EXIT;
    Atomics.store(hp.start.control, P.COMMAND, ++hp.seq);
    Atomics.notify(hp.start.control, P.COMMAND);
    void hp.worker.terminate();
  }

  private takeHist(): Float64Array {
    return this.pool.pop() ?? new Float64Array(this.histSize);
  }

  private giveHist(hist: Float64Array): void {
    this.pool.push(hist);
  }

  /**
   * Where the helper's half of the tree's features starts, when it should take it for a node of
   * `rows` rows whose histograms are `hists`; 0 = this thread does all.
   */
  private helperSplitAt(nFeats: number, rows: number, ...hists: Float64Array[]): number {
    const hp = this.helper;
    if (!hp || hp.treeFeatures === null || nFeats < 2 || rows < PARALLEL_MIN_ROWS) return 0;
    for (const h of hists) if (!hp.index.has(h)) return 0;
    return nFeats >> 1;
  }

  /** Hands the helper an operation over features [j0, j1) of the tree. */
  private submit(op: number, hist: Float64Array, small: Float64Array | null, b: number, e: number, j0: number, j1: number): void {
    const hp = this.helper!;
    const c = hp.start.control;
    c[P.OP] = op;
    c[P.HIST] = hp.index.get(hist)!;
    c[P.SMALL] = small ? hp.index.get(small)! : -1;
    c[P.BEGIN] = b;
    c[P.END] = e;
    c[P.J0] = j0;
    c[P.J1] = j1;
    c[P.UNIT] = this.unitHessian ? 1 : 0;
    Atomics.store(c, P.COMMAND, ++hp.seq);
    Atomics.notify(c, P.COMMAND);
  }

  /** Waits for the helper to finish the last operation. */
  private awaitHelper(): void {
    const hp = this.helper!;
    const c = hp.start.control;
    for (let spin = 0; spin < 2000 && Atomics.load(c, P.DONE) !== hp.seq; spin++);
    for (let done = Atomics.load(c, P.DONE); done !== hp.seq; done = Atomics.load(c, P.DONE)) Atomics.wait(c, P.DONE, done);
  }

  /** Histogram of positions [b, e) over the listed features (only those slots are written). */
  private buildHist(hist: Float64Array, feats: Int32Array, nFeats: number, b: number, e: number): void {
    const m = feats === this.helper?.treeFeatures ? this.helperSplitAt(nFeats, e - b, hist) : 0;
    if (m === 0) {
      buildHistRange(this.histData, this.unitHessian, hist, feats, 0, nFeats, b, e);
      return;
    }
    this.submit(P.OP_BUILD, hist, null, b, e, m, nFeats);
    buildHistRange(this.histData, this.unitHessian, hist, feats, 0, m, b, e);
    this.awaitHelper();
  }

  /** The smaller child's histogram from rows [b, e), then parent −= small (the larger child's). */
  private buildSmallAndSubtract(parent: Float64Array, small: Float64Array, feats: Int32Array, nFeats: number, b: number, e: number): void {
    const m = this.helperSplitAt(nFeats, e - b, parent, small);
    if (m > 0) this.submit(P.OP_BUILD_SUBTRACT, parent, small, b, e, m, nFeats);
    const mine = m > 0 ? m : nFeats;
    buildHistRange(this.histData, this.unitHessian, small, feats, 0, mine, b, e);
    subtractHistRange(this.nBins, parent, small, feats, 0, mine);
    if (m > 0) this.awaitHelper();
  }

  /** Stable in-place partition of positions [b, e); returns the first right position. */
  private partition(b: number, e: number, f: number, bin: number, missingLeft: boolean): number {
    const nRows = this.data.nRows;
    const col = this.codes.subarray(f * nRows, (f + 1) * nRows);
    const { rows, tmpRows } = this;
    // Branch-free: every row is written to both sides and only the matching cursor advances,
    // because the left/right outcome is close to a coin flip and mispredicts badly.
    const goLeft = this.goLeft;
    for (let c = 0; c < 256; c++) goLeft[c] = c <= bin || (missingLeft && c === MISSING_CODE) ? 1 : 0;
    let l = b;
    let t = 0;
    for (let i = b; i < e; i++) {
      const r = rows[i];
      const m = goLeft[col[r]];
      rows[l] = r;
      tmpRows[t] = r;
      l += m;
      t += 1 - m;
    }
    rows.set(tmpRows.subarray(0, t), l);
    return l;
  }

  /**
   * Grows a tree on the rows listed at positions [0, nUsed) of `rows`; g / h are indexed by row id.
   * Rows at positions >= nUsed are left untouched.
   */
  grow(nUsed: number, opt: GrowOptions): WorkTree {
    const tree: WorkTree = {
      feature: [], bin: [], missingLeft: [], left: [], right: [],
      value: [], gain: [], cover: [], begin: [], end: [],
    };
    const { lambda, minChildWeight: mcw, maxDepth, gamma } = opt;
    const forest = opt.mtry > 0;
    this.unitHessian = opt.unitHessian;
    let G = 0;
    let H = 0;
    for (let i = 0; i < nUsed; i++) {
      const r = this.rows[i];
      G += this.g[r];
      H += this.h[r];
    }
    const addNode = (b: number, e: number, sg: number, sh: number): number => {
      tree.feature.push(-1);
      tree.bin.push(0);
      tree.missingLeft.push(0);
      tree.left.push(-1);
      tree.right.push(-1);
      tree.value.push(sh + lambda > 0 ? Math.fround((-sg / (sh + lambda)) * opt.leafScale) : 0);
      tree.gain.push(0);
      tree.cover.push(sh);
      tree.begin.push(b);
      tree.end.push(e);
      return tree.feature.length - 1;
    };

    let tf = opt.treeFeatures;
    const nTf = tf.length;
    if (this.helper) {
      // Boosting: the helper reads the tree's features from shared memory. A forest draws
      // features per split and stays on this thread.
      this.helper.treeFeatures = forest ? null : this.helper.start.feats.subarray(0, nTf);
      if (!forest) {
        this.helper.treeFeatures!.set(tf);
        tf = this.helper.treeFeatures!;
      }
    }
    // Stack of nodes waiting to be split: id, depth, G, H, histogram (boosting only).
    const stack: { id: number; depth: number; sg: number; sh: number; hist: Float64Array | null }[] = [];
    const root = addNode(0, nUsed, G, H);
    if (maxDepth > 0 && H >= 2 * mcw && nUsed >= 2) {
      let hist: Float64Array | null = null;
      if (!forest) {
        hist = this.takeHist();
        this.buildHist(hist, tf, nTf, 0, nUsed);
      }
      stack.push({ id: root, depth: 0, sg: G, sh: H, hist });
    }
    const best = { gain: 0, f: -1, bin: 0, ml: false, gl: 0, hl: 0 };
    let scratch: Float64Array | null = null;

    while (stack.length > 0) {
      const node = stack.pop()!;
      const b = tree.begin[node.id];
      const e = tree.end[node.id];
      let hist = node.hist;
      let feats = tf;
      let nFeats = nTf;
      if (forest) {
        // Partial Fisher–Yates draw of mtry features for this split.
        const fb = this.featBuf;
        fb.set(tf);
        const m = Math.min(opt.mtry, nTf);
        for (let j = 0; j < m; j++) {
          const k = j + opt.rng.nextInt(nTf - j);
          const t = fb[j];
          fb[j] = fb[k];
          fb[k] = t;
        }
        feats = fb;
        nFeats = m;
        scratch ??= this.takeHist();
        hist = scratch;
        this.buildHist(hist, feats, nFeats, b, e);
      }
      this.findSplit(hist!, feats, nFeats, node.sg, node.sh, lambda, mcw, best, e - b);
      const found = best.f >= 0 && best.gain >= gamma;
      if (!found) {
        if (!forest) this.giveHist(hist!);
        continue;
      }
      const mid = this.partition(b, e, best.f, best.bin, best.ml);
      const gl = best.gl;
      const hl = best.hl;
      const gr = node.sg - gl;
      const hr = node.sh - hl;
      const li = addNode(b, mid, gl, hl);
      const ri = addNode(mid, e, gr, hr);
      const id = node.id;
      tree.feature[id] = best.f;
      tree.bin[id] = best.bin;
      tree.missingLeft[id] = best.ml ? 1 : 0;
      tree.left[id] = li;
      tree.right[id] = ri;
      tree.gain[id] = best.gain;
      tree.value[id] = 0;

      const depth = node.depth + 1;
      const canL = depth < maxDepth && hl >= 2 * mcw && mid - b >= 2;
      const canR = depth < maxDepth && hr >= 2 * mcw && e - mid >= 2;
      if (forest) {
        if (canR) stack.push({ id: ri, depth, sg: gr, sh: hr, hist: null });
        if (canL) stack.push({ id: li, depth, sg: gl, sh: hl, hist: null });
        continue;
      }
      const parent = hist!;
      if (!canL && !canR) {
        this.giveHist(parent);
        continue;
      }
      // Build the child with fewer rows; the other is parent − small, computed in place.
      const leftSmaller = mid - b <= e - mid;
      const small = this.takeHist();
      if (leftSmaller) this.buildSmallAndSubtract(parent, small, tf, nTf, b, mid);
      else this.buildSmallAndSubtract(parent, small, tf, nTf, mid, e);
      const histL = leftSmaller ? small : parent;
      const histR = leftSmaller ? parent : small;
      if (canR) stack.push({ id: ri, depth, sg: gr, sh: hr, hist: histR });
      else this.giveHist(histR);
      if (canL) stack.push({ id: li, depth, sg: gl, sh: hl, hist: histL });
      else this.giveHist(histL);
    }
    if (scratch) this.giveHist(scratch);
    return tree;
  }

  /**
   * Best split over the listed features (scanned by findSplitRange; with the helper, the second
   * half of them on its thread). Writes into `best` (f = −1 if none).
   */
  private findSplit(
    hist: Float64Array,
    feats: Int32Array,
    nFeats: number,
    G: number,
    H: number,
    lambda: number,
    mcw: number,
    best: { gain: number; f: number; bin: number; ml: boolean; gl: number; hl: number },
    rows: number,
  ): void {
    const parentScore = (G * G) / (H + lambda);
    const m = feats === this.helper?.treeFeatures ? this.helperSplitAt(nFeats, rows, hist) : 0;
    let helperSplit: Float64Array | null = null;
    if (m > 0) {
      const num = this.helper!.start.numbers;
      num[P.NUM_G] = G;
      num[P.NUM_H] = H;
      num[P.NUM_LAMBDA] = lambda;
      num[P.NUM_MCW] = mcw;
      num[P.NUM_START] = parentScore;
      this.submit(P.OP_SPLIT, hist, null, 0, 0, m, nFeats);
      helperSplit = this.helper!.start.split;
    }
    const out = this.split;
    findSplitRange(this.nBins, hist, feats, 0, m > 0 ? m : nFeats, G, H, lambda, mcw, parentScore, out);
    if (helperSplit) {
      this.awaitHelper();
      // The later half wins only when strictly better: the first of equal scores, as one scan.
      if (helperSplit[SPLIT_FEATURE] >= 0 && helperSplit[SPLIT_SCORE] > out[SPLIT_SCORE]) out.set(helperSplit);
    }
    const bestScore = out[SPLIT_SCORE];
    best.f = out[SPLIT_FEATURE];
    best.bin = out[SPLIT_BIN];
    best.ml = out[SPLIT_MISSING_LEFT] === 1;
    best.gl = out[SPLIT_GL];
    best.hl = out[SPLIT_HL];
    best.gain = 0;
    const gain = bestScore - parentScore;
    if (best.f < 0 || !(gain > REL_EPS * bestScore)) {
      best.f = -1;
      return;
    }
    best.gain = gain;
  }
}
