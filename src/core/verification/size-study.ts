import { alphaIndex } from '../scores/alpha-index.ts';
import { crpsSorted } from '../scores/crps.ts';
import { createPrng, type Prng } from '../prng.ts';
import { quantileSorted } from '../scores/quantile.ts';
import { sourceValues, type SourceName, type VerificationCase } from './case.ts';
import { GrowableF64 } from './growable.ts';
import { jsonNumber } from './json-number.ts';
import { pitCoverage, pitFromSorted } from './randomised-pit.ts';
import { ValueSorter } from './value-sorter.ts';

/**
 * Ensemble-size study: how much do more members buy? For each case and repeat, members are
 * drawn without replacement (partial Fisher–Yates); the sizes of one repeat are nested prefixes
 * of the same random order (each prefix is itself a uniform random subset; nesting makes the
 * differences between sizes less noisy). Per size: mean CRPS (standard and fair, Ferro 2014),
 * mean width and coverage of the central `level` band, PIT coverage of that level, and the
 * alpha index computed per repeat over all cases (mean and standard deviation over repeats).
 *
 * What to expect for exchangeable members: the fair CRPS is an unbiased estimate of the CRPS of
 * the distribution the members come from, so its mean does not depend on the size; the
 * standard CRPS exceeds it by E|X − X'|/(2m) (from the formulas in Ferro 2014), so it falls
 * towards the fair value as m grows.
 */
export interface SizeStudyOptions {
  /** Forecasts to study (default ['corrected']). */
  sources?: SourceName[];
  /** Sizes (default 5, 10, 25, 50, 100, 250, 500, 1000 up to the members available, plus the full count). */
  sizes?: number[];
  /** Random draws per case and size (default 20). */
  repeats?: number;
  seed?: number;
  /**
   * Share of cases studied (default 1 = all), to bound the cost on long hindcasts. Cases are
   * picked at random (seeded), not every n-th, so the pick does not follow the lead-time cycle.
   */
  caseFraction?: number;
  /** Central interval level for width and coverage (default 0.95). */
  level?: number;
}

export interface SizeStudyRow {
  size: number;
  /** Cases scored at this size (cases with fewer members are left out). */
  cases: number;
  crps: number | null;
  fairCrps: number | null;
  meanWidth: number | null;
  /** Band coverage: observation between the definition-7 quantiles of the drawn members. */
  coverage: number | null;
  /** Share of PIT values inside the level's central interval (expectation = level when calibrated). */
  pitCoverage: number | null;
  alphaIndex: number | null;
  alphaIndexSd: number | null;
}

export interface SizeStudyResult {
  source: SourceName;
  /** Members available in the first case studied. */
  members: number;
  level: number;
  repeats: number;
  caseFraction: number;
  rows: SizeStudyRow[];
}

export const DEFAULT_STUDY_SIZES: readonly number[] = [5, 10, 25, 50, 100, 250, 500, 1000];

interface SizeSums {
  size: number;
  cases: number;
  crps: number;
  fair: number;
  width: number;
  covered: number;
  pit: GrowableF64[];
}

export class SizeStudyAccumulator {
  private sums: SizeSums[] | null = null;
  private perm = new Int32Array(0);
  private permM = -1;
  private buf = new Float64Array(0);
  private readonly sorter = new ValueSorter();
  private members = 0;
  readonly repeats: number;
  readonly caseFraction: number;
  readonly level: number;
  private readonly rng: Prng;

  constructor(
    readonly source: SourceName,
    private readonly options: SizeStudyOptions,
    stream: number,
  ) {
    this.repeats = options.repeats ?? 20;
    this.caseFraction = options.caseFraction ?? 1;
    this.level = options.level ?? 0.95;
    if (!Number.isInteger(this.repeats) || this.repeats < 1) throw new RangeError('repeats must be a positive integer');
    if (!(this.caseFraction > 0 && this.caseFraction <= 1)) throw new RangeError('caseFraction must be in (0, 1]');
    if (!(this.level > 0 && this.level < 1)) throw new RangeError('level must be in (0, 1)');
    this.rng = createPrng(options.seed ?? 1, stream);
  }

  private init(m: number): SizeSums[] {
    this.members = m;
    let sizes = this.options.sizes ? [...this.options.sizes] : DEFAULT_STUDY_SIZES.filter((s) => s < m).concat([m]);
    for (const s of sizes) if (!Number.isInteger(s) || s < 1) throw new RangeError(`study sizes must be positive integers, got ${s}`);
    sizes = [...new Set(sizes)].filter((s) => s <= m).sort((a, b) => a - b);
    return sizes.map((size) => ({
      size,
      cases: 0,
      crps: 0,
      fair: 0,
      width: 0,
      covered: 0,
      pit: Array.from({ length: this.repeats }, () => new GrowableF64()),
    }));
  }

  /** Adds one case: its m finite values (any order) and observation y. */
  add(values: ArrayLike<number>, m: number, y: number): void {
    if (m < 1 || (this.caseFraction < 1 && this.rng.nextFloat() >= this.caseFraction)) return;
    const sums = (this.sums ??= this.init(m));
    if (this.permM !== m) {
      // Any permutation of 0 … m−1 works as the start of a partial Fisher–Yates shuffle.
      if (this.perm.length < m) this.perm = new Int32Array(m);
      for (let i = 0; i < m; i++) this.perm[i] = i;
      this.permM = m;
      if (this.buf.length < m) this.buf = new Float64Array(m);
    }
    let top = 0;
    for (const s of sums) if (s.size <= m) top = s.size;
    if (top === 0) return;
    const perm = this.perm;
    const lo = (1 - this.level) / 2;
    const hi = (1 + this.level) / 2;
    for (let r = 0; r < this.repeats; r++) {
      for (let i = 0; i < top; i++) {
        const j = i + this.rng.nextInt(m - i);
        const t = perm[i];
        perm[i] = perm[j];
        perm[j] = t;
      }
      for (const s of sums) {
        const k = s.size;
        if (k > m) break;
        const buf = this.buf;
        let min = Infinity;
        for (let i = 0; i < k; i++) {
          const v = values[perm[i]];
          buf[i] = v + 0;
          if (v < min) min = v;
        }
        const sub = this.sorter.sort(buf, k, min >= 0);
        s.crps += crpsSorted(sub, y);
        if (k >= 2) s.fair += crpsSorted(sub, y, true);
        const a = quantileSorted(sub, lo);
        const b = quantileSorted(sub, hi);
        s.width += b - a;
        if (y >= a && y <= b) s.covered++;
        s.pit[r].push(pitFromSorted(sub, k, y, this.rng.nextFloat()));
        if (r === 0) s.cases++;
      }
    }
  }

  result(): SizeStudyResult {
    const rows: SizeStudyRow[] = (this.sums ?? []).map((s) => {
      const draws = s.cases * this.repeats;
      const alphas = s.pit.map((p) => alphaIndex(p.view()));
      const am = alphas.reduce((x, v) => x + v, 0) / alphas.length;
      const asd = alphas.length > 1 ? Math.sqrt(alphas.reduce((x, v) => x + (v - am) ** 2, 0) / (alphas.length - 1)) : NaN;
      let inside = 0;
      let total = 0;
      for (const p of s.pit) {
        const c = pitCoverage(p.view(), this.level);
        inside += c.coverage * c.n;
        total += c.n;
      }
      return {
        size: s.size,
        cases: s.cases,
        crps: jsonNumber(s.crps / draws),
        fairCrps: jsonNumber(s.size >= 2 ? s.fair / draws : NaN),
        meanWidth: jsonNumber(s.width / draws),
        coverage: jsonNumber(s.covered / draws),
        pitCoverage: jsonNumber(inside / total),
        alphaIndex: jsonNumber(am),
        alphaIndexSd: jsonNumber(asd),
      };
    });
    return { source: this.source, members: this.members, level: this.level, repeats: this.repeats, caseFraction: this.caseFraction, rows };
  }
}

/**
 * Size study over verification cases (cases without observation, or outside the lead range,
 * are skipped). One result per source studied; a source absent from the cases is left out.
 */
export function ensembleSizeStudy(
  cases: Iterable<VerificationCase>,
  options: SizeStudyOptions & { leadRange?: { min?: number; max?: number } | null } = {},
): SizeStudyResult[] {
  const sources = options.sources ?? ['corrected'];
  const accs = sources.map((s, i) => new SizeStudyAccumulator(s, options, 100 + i));
  const minLead = options.leadRange?.min ?? -Infinity;
  const maxLead = options.leadRange?.max ?? Infinity;
  let row = new Float64Array(64);
  for (const c of cases) {
    const y = c.observation;
    if (y === null || !Number.isFinite(y) || c.lead < minLead || c.lead > maxLead) continue;
    for (const acc of accs) {
      const v = sourceValues(c, acc.source);
      if (!v) continue;
      if (row.length < v.length) row = new Float64Array(v.length);
      let m = 0;
      for (let i = 0; i < v.length; i++) {
        const x = v[i];
        if (x !== null && Number.isFinite(x)) row[m++] = x;
      }
      acc.add(row, m, y);
    }
  }
  return accs.map((a) => a.result()).filter((r) => r.rows.length > 0);
}
