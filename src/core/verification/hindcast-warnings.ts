import type { VerificationCase } from './case.ts';
import type { WarningRun } from './warning-verification.ts';

/**
 * Gathers a hindcast's cases (runHindcast hands them one lead at a time, in issue order) back
 * into one run per issue for the warning verification: raw and corrected members and the stage's
 * trajectories as paths over the leads (unobserved leads stay missing), so any-time chances come
 * from the same coherent trajectories serving publishes.
 */
export class HindcastWarningCollector {
  private issue = -1;
  private run: WarningRun | null = null;

  constructor(
    private readonly nLeads: number,
    private readonly describe: (issue: number) => { issueMs: number; validMs: ArrayLike<number>; persistence: number },
    private readonly onRun: (run: WarningRun) => void,
  ) {}

  add(c: VerificationCase, issue: number): void {
    if (issue !== this.issue) {
      this.finish();
      this.issue = issue;
      this.run = this.start(c, issue);
    }
    const run = this.run!;
    const H = this.nLeads;
    const k = c.lead;
    if (!(k >= 0 && k < H)) return;
    (run.observed as Float64Array)[k] = c.observation ?? NaN;
    const put = (dst: Float64Array, src: ArrayLike<number | null> | null | undefined, count: number) => {
      if (!src) return;
      for (let j = 0; j < count; j++) {
        const v = src[j];
        dst[j * H + k] = v === null || v === undefined ? NaN : v;
      }
    };
    for (const [s, src] of [
      [0, c.raw],
      [1, c.corrected],
      [2, c.stochastic],
    ] as const) {
      const f = run.sources[s];
      if (f) put(f.values as Float64Array, src, f.count);
    }
  }

  /** Hands on the last issue's run. */
  finish(): void {
    if (this.run) this.onRun(this.run);
    this.run = null;
  }

  private start(c: VerificationCase, issue: number): WarningRun {
    const H = this.nLeads;
    const d = this.describe(issue);
    const paths = (count: number) => ({ values: new Float64Array(count * H).fill(NaN), count, trajectories: true });
    const sources = [paths(c.raw.length), paths(c.corrected.length)];
    if (c.stochastic) sources.push(paths(c.stochastic.length));
    return { issueMs: d.issueMs, nLeads: H, validMs: d.validMs, observed: new Float64Array(H).fill(NaN), persistence: d.persistence, sources };
  }
}
