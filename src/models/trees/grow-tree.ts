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

import type { BinnedFeatures } from './quantile-bins.ts';
import { MISSING_CODE } from './quantile-bins.ts';
import type { Prng } from '../../core/prng.ts';

const SLOTS = 512; // 256 codes × (g, h)
/** Relative guard against splits whose gain is floating-point noise. */
const REL_EPS = 1e-10;

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

/** Reusable buffers sized for the training rows; one per training run. */
export class TreeGrower {
  readonly rows: Int32Array;
  /** Gradient and hessian per row id (filled by the caller before grow). */
  readonly g: Float64Array;
  readonly h: Float64Array;
  private readonly tmpRows: Int32Array;
  private readonly pool: Float64Array[] = [];
  private readonly nBins: Int32Array;
  private readonly featBuf: Int32Array;
  private readonly goLeft = new Uint8Array(256);
  private unitHessian = false;

  constructor(readonly data: BinnedFeatures) {
    const n = data.nRows;
    this.rows = new Int32Array(n);
    this.g = new Float64Array(n);
    this.h = new Float64Array(n);
    this.tmpRows = new Int32Array(n);
    this.nBins = new Int32Array(data.nFeatures);
    for (let f = 0; f < data.nFeatures; f++) this.nBins[f] = data.cuts[f].length + 1;
    this.featBuf = new Int32Array(data.nFeatures);
  }

  private takeHist(): Float64Array {
    return this.pool.pop() ?? new Float64Array(this.data.nFeatures * SLOTS);
  }

  private giveHist(hist: Float64Array): void {
    this.pool.push(hist);
  }

  /** Histogram of positions [b, e) over the listed features (only those slots are written). */
  private buildHist(hist: Float64Array, feats: Int32Array, nFeats: number, b: number, e: number): void {
    const { codes, nRows } = this.data;
    const rows = this.rows;
    const g = this.g;
    const h = this.h;
    const unit = this.unitHessian;
    let j = 0;
    // Four features per pass over the rows: the row id and its (g, h) are loaded once for four
    // histogram updates; each feature's 4 KB of histogram stays in L1.
    for (; j + 8 <= nFeats; j += 8) {
      const b0 = feats[j + 0] * SLOTS;
      const o0 = feats[j + 0] * nRows;
      hist.fill(0, b0, b0 + SLOTS);
      const b1 = feats[j + 1] * SLOTS;
      const o1 = feats[j + 1] * nRows;
      hist.fill(0, b1, b1 + SLOTS);
      const b2 = feats[j + 2] * SLOTS;
      const o2 = feats[j + 2] * nRows;
      hist.fill(0, b2, b2 + SLOTS);
      const b3 = feats[j + 3] * SLOTS;
      const o3 = feats[j + 3] * nRows;
      hist.fill(0, b3, b3 + SLOTS);
      const b4 = feats[j + 4] * SLOTS;
      const o4 = feats[j + 4] * nRows;
      hist.fill(0, b4, b4 + SLOTS);
      const b5 = feats[j + 5] * SLOTS;
      const o5 = feats[j + 5] * nRows;
      hist.fill(0, b5, b5 + SLOTS);
      const b6 = feats[j + 6] * SLOTS;
      const o6 = feats[j + 6] * nRows;
      hist.fill(0, b6, b6 + SLOTS);
      const b7 = feats[j + 7] * SLOTS;
      const o7 = feats[j + 7] * nRows;
      hist.fill(0, b7, b7 + SLOTS);
      for (let i = b; i < e; i++) {
        const r = rows[i];
        const gi = g[r];
        const hi = unit ? 1 : h[r];
        let k = 0;
        k = b0 + (codes[o0 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b1 + (codes[o1 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b2 + (codes[o2 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b3 + (codes[o3 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b4 + (codes[o4 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b5 + (codes[o5 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b6 + (codes[o6 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b7 + (codes[o7 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
      }
    }
    for (; j + 4 <= nFeats; j += 4) {
      const b0 = feats[j] * SLOTS;
      const b1 = feats[j + 1] * SLOTS;
      const b2 = feats[j + 2] * SLOTS;
      const b3 = feats[j + 3] * SLOTS;
      const o0 = feats[j] * nRows;
      const o1 = feats[j + 1] * nRows;
      const o2 = feats[j + 2] * nRows;
      const o3 = feats[j + 3] * nRows;
      hist.fill(0, b0, b0 + SLOTS);
      hist.fill(0, b1, b1 + SLOTS);
      hist.fill(0, b2, b2 + SLOTS);
      hist.fill(0, b3, b3 + SLOTS);
      for (let i = b; i < e; i++) {
        const r = rows[i];
        const gi = g[r];
        const hi = unit ? 1 : h[r];
        let k = b0 + (codes[o0 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b1 + (codes[o1 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b2 + (codes[o2 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
        k = b3 + (codes[o3 + r] << 1);
        hist[k] += gi;
        hist[k + 1] += hi;
      }
    }
    for (; j < nFeats; j++) {
      const base = feats[j] * SLOTS;
      const o = feats[j] * nRows;
      hist.fill(0, base, base + SLOTS);
      for (let i = b; i < e; i++) {
        const r = rows[i];
        const k = base + (codes[o + r] << 1);
        hist[k] += g[r];
        hist[k + 1] += unit ? 1 : h[r];
      }
    }
  }

  /** hist[feat slots] −= small[feat slots]: turns the parent's histogram into the larger child's. */
  private subtractHist(hist: Float64Array, small: Float64Array, feats: Int32Array, nFeats: number): void {
    for (let j = 0; j < nFeats; j++) {
      const base = feats[j] * SLOTS;
      const nb = this.nBins[feats[j]];
      for (let k = base, end = base + 2 * nb; k < end; k++) hist[k] -= small[k];
      const m = base + 2 * MISSING_CODE;
      hist[m] -= small[m];
      hist[m + 1] -= small[m + 1];
    }
  }

  /** Stable in-place partition of positions [b, e); returns the first right position. */
  private partition(b: number, e: number, f: number, bin: number, missingLeft: boolean): number {
    const { codes, nRows } = this.data;
    const col = codes.subarray(f * nRows, (f + 1) * nRows);
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

    const tf = opt.treeFeatures;
    const nTf = tf.length;
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
      this.findSplit(hist!, feats, nFeats, node.sg, node.sh, lambda, mcw, best);
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
      if (leftSmaller) this.buildHist(small, tf, nTf, b, mid);
      else this.buildHist(small, tf, nTf, mid, e);
      this.subtractHist(parent, small, tf, nTf);
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
   * Best split over the listed features: scans bins left to right with missing values sent right,
   * and again with them sent left when the node has any. Writes into `best` (f = −1 if none).
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
  ): void {
    const parentScore = (G * G) / (H + lambda);
    best.f = -1;
    best.gain = 0;
    let bestScore = parentScore; // score of a candidate = GL²/(HL+λ) + GR²/(HR+λ)
    const nBins = this.nBins;
    for (let j = 0; j < nFeats; j++) {
      const f = feats[j];
      const nb = nBins[f];
      if (nb < 2) continue;
      const base = f * SLOTS;
      const gm = hist[base + 2 * MISSING_CODE];
      const hm = hist[base + 2 * MISSING_CODE + 1];
      const hasMissing = hm > 0;
      let gl = 0;
      let hl = 0;
      for (let bin = 0, k = base; bin < nb - 1; bin++, k += 2) {
        const hb = hist[k + 1];
        if (hb === 0) continue; // empty bin: same partition as the previous candidate
        gl += hist[k];
        hl += hb;
        // Missing values to the right.
        let hr = H - hl;
        if (hl >= mcw && hr >= mcw && hl > 0 && hr > 0) {
          const gr = G - gl;
          const s = (gl * gl) / (hl + lambda) + (gr * gr) / (hr + lambda);
          if (s > bestScore) {
            bestScore = s;
            best.f = f; best.bin = bin; best.ml = false; best.gl = gl; best.hl = hl;
          }
        }
        if (hasMissing) {
          const gl2 = gl + gm;
          const hl2 = hl + hm;
          hr = H - hl2;
          if (hl2 >= mcw && hr >= mcw && hr > 0) {
            const gr = G - gl2;
            const s = (gl2 * gl2) / (hl2 + lambda) + (gr * gr) / (hr + lambda);
            if (s > bestScore) {
              bestScore = s;
              best.f = f; best.bin = bin; best.ml = true; best.gl = gl2; best.hl = hl2;
            }
          }
        }
      }
    }
    const gain = bestScore - parentScore;
    if (best.f < 0 || !(gain > REL_EPS * bestScore)) {
      best.f = -1;
      return;
    }
    best.gain = gain;
  }
}
