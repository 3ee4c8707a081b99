import { sortNonNegative } from '../stochastic/radix-sort.ts';

/**
 * Sorts the values of one case in place, reusing its scratch buffers. Flows are never negative,
 * so long rows (stochastic samples) take the stage's radix sort (src/core/stochastic/radix-sort.ts), several
 * times faster than the engine's sort for 1000 values; short rows and rows with negative values
 * use the engine's sort. Callers write +0 for −0 (v + 0 does it), as the radix sort requires.
 */
export class ValueSorter {
  private tmp = new Float64Array(0);
  private tmpWords: Uint32Array = new Uint32Array(0);
  private readonly counts = new Int32Array(1024);
  private lastRow: Float64Array | null = null;
  private lastWords: Uint32Array = new Uint32Array(0);

  /** Sorts row[0 … n−1] ascending; nonNegative = every value ≥ 0. Returns the sorted view. */
  sort(row: Float64Array, n: number, nonNegative: boolean): Float64Array {
    const view = row.subarray(0, n);
    // Rows read from run records come ascending already: one pass tells, and the sort is skipped.
    let i = 1;
    while (i < n && view[i - 1] <= view[i]) i++;
    if (i >= n) return view;
    // Below a few hundred values the radix passes' fixed cost outweighs their gain.
    if (!nonNegative || n < 256) return view.sort();
    if (this.tmp.length < n) {
      this.tmp = new Float64Array(row.length);
      this.tmpWords = new Uint32Array(this.tmp.buffer);
    }
    if (this.lastRow !== row) {
      this.lastRow = row;
      this.lastWords = new Uint32Array(row.buffer, row.byteOffset, 2 * row.length);
    }
    sortNonNegative(row, n, this.tmp, this.lastWords, this.tmpWords, this.counts);
    return view;
  }
}
