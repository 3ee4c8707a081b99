/**
 * Milliseconds per named stage of one request, read from performance.now() at each stage's end.
 * Stages may recur (the time is added). `serverTiming` renders them as a W3C Server-Timing header.
 */
export class StageClock {
  private last: number;
  readonly ms: Record<string, number> = {};

  constructor(start = performance.now()) {
    this.last = start;
  }

  /** Ends the current stage, naming it; returns its milliseconds. */
  lap(stage: string): number {
    const now = performance.now();
    const d = now - this.last;
    this.last = now;
    this.add(stage, d);
    return d;
  }

  /** Adds time measured elsewhere (a worker's) without moving the clock. */
  add(stage: string, ms: number): void {
    this.ms[stage] = (this.ms[stage] ?? 0) + ms;
  }
}

/** `name;dur=1.23, …` (W3C Server Timing); names are tokens. */
export function serverTiming(ms: Record<string, number>): string {
  return Object.entries(ms)
    .map(([name, d]) => `${name};dur=${d.toFixed(2)}`)
    .join(', ');
}
