import { crpsSorted } from '../scores/crps.ts';
import { countAboveSorted } from '../scores/exceedance.ts';
import type { Prng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { GrowableF64 } from './growable.ts';
import { HersbachAccumulator } from './hersbach-accumulator.ts';
import { pitFromSorted } from './randomised-pit.ts';
import { ValueSorter } from './value-sorter.ts';

/**
 * Per-forecast (raw, corrected or stochastic) running state of a comparison. Each case is
 * loaded (finite values copied into a reusable row), then committed with its observation:
 * the row is sorted once and every score is taken from the sorted row. Per case only a few
 * numbers are kept (CRPS, fair CRPS, PIT, median, mean, exceedance probabilities); interval
 * sums and the Hersbach bins are summed on the fly.
 */
export class SourceAccumulator {
  private row = new Float64Array(64);
  private m = 0;
  private nonNegative = true;
  private readonly sorter = new ValueSorter();
  readonly crps = new GrowableF64();
  readonly fairCrps = new GrowableF64();
  readonly pit = new GrowableF64();
  readonly median = new GrowableF64();
  readonly mean = new GrowableF64();
  /** Per threshold: fraction of values above it, one per case. */
  readonly probAbove: GrowableF64[];
  readonly coveredCount: Float64Array;
  readonly widthSum: Float64Array;
  hersbach: HersbachAccumulator | null = null;
  /** Cases left out of the Hersbach sums because their member count differed from the first. */
  hersbachSkipped = 0;
  minMembers = Infinity;
  maxMembers = 0;

  constructor(
    readonly levels: readonly number[],
    readonly thresholds: readonly number[],
    private readonly rng: Prng,
  ) {
    this.probAbove = thresholds.map(() => new GrowableF64());
    this.coveredCount = new Float64Array(levels.length);
    this.widthSum = new Float64Array(levels.length);
  }

  /** Copies the finite values of one case; returns how many there are. */
  load(values: ArrayLike<number | null>): number {
    if (this.row.length < values.length) this.row = new Float64Array(values.length);
    const row = this.row;
    let m = 0;
    let min = Infinity;
    for (let i = 0; i < values.length; i++) {
      const v = values[i];
      if (v !== null && Number.isFinite(v)) {
        row[m++] = v + 0; // −0 → +0
        if (v < min) min = v;
      }
    }
    this.m = m;
    this.nonNegative = min >= 0;
    return m;
  }

  /**
   * Scores the loaded case against observation y; returns the sorted row (valid until the next
   * load). quantileSet: the values are quantiles of a distribution (e.g. its 100 midpoint levels),
   * not exchangeable draws. The fair CRPS (Ferro 2014) corrects for a finite sample of draws, so
   * it applies to members and samples only; for a quantile set the standard CRPS already
   * estimates the distribution's CRPS and is recorded as its "fair" value too.
   */
  commit(y: number, quantileSet = false): Float64Array {
    const m = this.m;
    const sorted = this.sorter.sort(this.row, m, this.nonNegative);
    if (m < this.minMembers) this.minMembers = m;
    if (m > this.maxMembers) this.maxMembers = m;
    const crps = crpsSorted(sorted, y);
    this.crps.push(crps);
    this.fairCrps.push(quantileSet ? crps : m >= 2 ? crpsSorted(sorted, y, true) : NaN);
    // One uniform per case, always drawn, so results do not depend on where ties occur.
    this.pit.push(pitFromSorted(sorted, m, y, this.rng.nextFloat()));
    this.median.push(quantileSorted(sorted, 0.5));
    let s = 0;
    for (let i = 0; i < m; i++) s += sorted[i];
    this.mean.push(s / m);
    for (let t = 0; t < this.thresholds.length; t++) this.probAbove[t].push(countAboveSorted(sorted, this.thresholds[t]) / m);
    for (let l = 0; l < this.levels.length; l++) {
      const lo = quantileSorted(sorted, (1 - this.levels[l]) / 2);
      const hi = quantileSorted(sorted, (1 + this.levels[l]) / 2);
      if (y >= lo && y <= hi) this.coveredCount[l]++;
      this.widthSum[l] += hi - lo;
    }
    if (this.hersbach === null) this.hersbach = new HersbachAccumulator(m);
    // The row holds exactly m values, so its CRPS is the one the decomposition sums.
    if (m === this.hersbach.nMembers) this.hersbach.add(sorted, y, crps);
    else this.hersbachSkipped++;
    return sorted;
  }

  get n(): number {
    return this.crps.length;
  }
}
