/**
 * Allocation-free sorts for the stochastic stage's hot loop, where the engine's built-in
 * TypedArray sort costs ~60 µs per 1000 values (Node 20) and runs hundreds of times per call.
 * LSD radix sorts, 8 bits per pass; all digit histograms are counted in one read pass and
 * passes where every key shares the digit are skipped.
 */

/**
 * Sorts a[0 … n−1] ascending in place. Values must be ≥ 0 (or +0) and not NaN: for those the
 * IEEE-754 bit pattern orders like the number, so sorting on the top 24 bits of the high word
 * nearly sorts, and one insertion pass on the full value finishes values sharing them (relative
 * gap below 2^-12). tmp: scratch of length ≥ n; aWords/tmpWords: Uint32Array views of a and tmp;
 * counts: Int32Array of length ≥ 1024.
 */
export function sortNonNegative(
  a: Float64Array,
  n: number,
  tmp: Float64Array,
  aWords: Uint32Array,
  tmpWords: Uint32Array,
  counts: Int32Array,
): void {
  if (n < 2) return;
  // Digits are bytes 1–3 of the high word; the lowest byte (relative gap < 2^-12) is left to the
  // insertion pass, which is cheaper than a fourth scatter for typical spreads.
  counts.fill(0, 0, 1024);
  for (let i = 0; i < n; i++) {
    const w = aWords[2 * i + 1];
    counts[256 + ((w >>> 8) & 255)]++;
    counts[512 + ((w >>> 16) & 255)]++;
    counts[768 + (w >>> 24)]++;
  }
  const w0 = aWords[1];
  let src = a;
  let dst = tmp;
  let srcW = aWords;
  let dstW = tmpWords;
  for (let pass = 1; pass < 4; pass++) {
    const shift = 8 * pass;
    const base = 256 * pass;
    if (counts[base + ((w0 >>> shift) & 255)] === n) continue; // one digit for all: nothing to do
    let sum = 0;
    for (let d = base; d < base + 256; d++) {
      const c = counts[d];
      counts[d] = sum;
      sum += c;
    }
    for (let i = 0; i < n; i++) dst[counts[base + ((srcW[2 * i + 1] >>> shift) & 255)]++] = src[i];
    const t = src;
    src = dst;
    dst = t;
    const tw = srcW;
    srcW = dstW;
    dstW = tw;
  }
  if (src !== a) a.set(src.subarray(0, n));
  // Insertion pass for values sharing the sorted bits. Should that need many moves (values
  // packed very closely), finish with the built-in sort instead.
  let moves = 0;
  for (let i = 1; i < n; i++) {
    const v = a[i];
    let j = i - 1;
    if (a[j] <= v) continue;
    while (j >= 0 && a[j] > v) {
      a[j + 1] = a[j];
      j--;
      moves++;
    }
    a[j + 1] = v;
    if (moves > 8 * n) {
      a.subarray(0, n).sort();
      return;
    }
  }
}

/**
 * Stable order of unsigned integer keys[0 … n−1] < 2^bits (bits ≤ 32): writes order[p] = index
 * of the p-th smallest (ties keep index order). keys is used as scratch and left permuted.
 * counts: Int32Array of length ≥ 1024.
 */
export function radixOrder(
  keys: Uint32Array,
  n: number,
  bits: number,
  order: Int32Array,
  tmpKeys: Uint32Array,
  tmpOrder: Int32Array,
  counts: Int32Array,
): void {
  const passes = Math.max(1, Math.ceil(bits / 8));
  counts.fill(0, 0, 256 * passes);
  for (let i = 0; i < n; i++) {
    order[i] = i;
    const w = keys[i];
    for (let p = 0; p < passes; p++) counts[256 * p + ((w >>> (8 * p)) & 255)]++;
  }
  const w0 = keys[0];
  let k = keys;
  let o = order;
  let k2 = tmpKeys;
  let o2 = tmpOrder;
  for (let pass = 0; pass < passes; pass++) {
    const shift = 8 * pass;
    const base = 256 * pass;
    if (counts[base + ((w0 >>> shift) & 255)] === n) continue;
    let sum = 0;
    for (let d = base; d < base + 256; d++) {
      const c = counts[d];
      counts[d] = sum;
      sum += c;
    }
    for (let i = 0; i < n; i++) {
      const key = k[i];
      const p = counts[base + ((key >>> shift) & 255)]++;
      k2[p] = key;
      o2[p] = o[i];
    }
    const t = k;
    k = k2;
    k2 = t;
    const to = o;
    o = o2;
    o2 = to;
  }
  if (o !== order) order.set(o.subarray(0, n));
}

/**
 * Sorts keys[0 … n−1] ascending by bits lo … hi−1 only (hi − lo ≤ 32; LSD radix, 8 bits per
 * pass, stable); lower bits ride along as payload (e.g. an index packed under a rank). All
 * digit histograms are counted in one read pass. counts: length ≥ 1024.
 */
export function sortPackedKeys(
  keys: Uint32Array,
  n: number,
  lo: number,
  hi: number,
  tmp: Uint32Array,
  counts: Int32Array,
): void {
  if (n < 2 || hi <= lo) return;
  const passes = Math.ceil((hi - lo) / 8);
  counts.fill(0, 0, 256 * passes);
  if (passes === 2) {
    // The common case (ranks of up to 16 bits) unrolled.
    for (let i = 0; i < n; i++) {
      const v = keys[i] >>> lo;
      counts[v & 255]++;
      counts[256 + ((v >>> 8) & 255)]++;
    }
  } else {
    for (let i = 0; i < n; i++) {
      const v = keys[i] >>> lo;
      for (let p = 0; p < passes; p++) counts[256 * p + ((v >>> (8 * p)) & 255)]++;
    }
  }
  const first = keys[0] >>> lo;
  let src = keys;
  let dst = tmp;
  for (let p = 0; p < passes; p++) {
    const shift = lo + 8 * p;
    const base = 256 * p;
    if (counts[base + ((first >>> (8 * p)) & 255)] === n) continue; // one digit for all: nothing to do
    let sum = 0;
    for (let d = base; d < base + 256; d++) {
      const c = counts[d];
      counts[d] = sum;
      sum += c;
    }
    for (let i = 0; i < n; i++) {
      const v = src[i];
      dst[counts[base + ((v >>> shift) & 255)]++] = v;
    }
    const t = src;
    src = dst;
    dst = t;
  }
  if (src !== keys) keys.set(src.subarray(0, n));
}
