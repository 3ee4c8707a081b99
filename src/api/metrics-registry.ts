/** A small Prometheus text-format registry: counters and histograms with labels. */

type Labels = Record<string, string>;

const key = (labels: Labels) =>
  Object.keys(labels)
    .sort()
    .map((k) => `${k}="${String(labels[k]).replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\n/g, '\\n')}"`)
    .join(',');

export class Counter {
  private values = new Map<string, number>();
  constructor(
    readonly name: string,
    readonly help: string,
  ) {}
  inc(labels: Labels = {}, by = 1): void {
    const k = key(labels);
    this.values.set(k, (this.values.get(k) ?? 0) + by);
  }
  render(): string {
    const lines = [`# HELP ${this.name} ${this.help}`, `# TYPE ${this.name} counter`];
    if (!this.values.size) lines.push(`${this.name} 0`);
    for (const [k, v] of this.values) lines.push(`${this.name}${k ? `{${k}}` : ''} ${v}`);
    return lines.join('\n');
  }
}

export class Gauge {
  private values = new Map<string, number>();
  constructor(
    readonly name: string,
    readonly help: string,
  ) {}
  set(labels: Labels, value: number): void {
    this.values.set(key(labels), value);
  }
  render(): string {
    const lines = [`# HELP ${this.name} ${this.help}`, `# TYPE ${this.name} gauge`];
    for (const [k, v] of this.values) lines.push(`${this.name}${k ? `{${k}}` : ''} ${v}`);
    return lines.join('\n');
  }
}

export class Histogram {
  private series = new Map<string, { counts: number[]; sum: number; count: number }>();
  constructor(
    readonly name: string,
    readonly help: string,
    readonly buckets: number[],
  ) {}
  observe(labels: Labels, value: number): void {
    const k = key(labels);
    let s = this.series.get(k);
    if (!s) this.series.set(k, (s = { counts: new Array(this.buckets.length).fill(0), sum: 0, count: 0 }));
    for (let i = 0; i < this.buckets.length; i++) if (value <= this.buckets[i]) s.counts[i]++;
    s.sum += value;
    s.count++;
  }
  render(): string {
    const lines = [`# HELP ${this.name} ${this.help}`, `# TYPE ${this.name} histogram`];
    for (const [k, s] of this.series) {
      const sep = k ? `${k},` : '';
      this.buckets.forEach((b, i) => lines.push(`${this.name}_bucket{${sep}le="${b}"} ${s.counts[i]}`));
      lines.push(`${this.name}_bucket{${sep}le="+Inf"} ${s.count}`);
      lines.push(`${this.name}_sum${k ? `{${k}}` : ''} ${s.sum}`);
      lines.push(`${this.name}_count${k ? `{${k}}` : ''} ${s.count}`);
    }
    return lines.join('\n');
  }
}

/** The service's metrics. */
export class Metrics {
  readonly requests = new Counter('sft_http_requests_total', 'HTTP requests by route, method and status code');
  readonly latency = new Histogram('sft_http_request_duration_seconds', 'HTTP request latency by route', [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5]);
  readonly stage = new Histogram('sft_correction_stage_seconds', 'Time of each correction stage (features, inference, stochastic, total)', [0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1]);
  readonly runs = new Counter('sft_forecast_runs_total', 'Corrected runs stored, by status (corrected or degraded)');
  readonly degraded = new Counter('sft_degraded_runs_total', 'Runs served in degraded mode, by reason');
  readonly rejectedBusy = new Counter('sft_correction_rejected_busy_total', 'Runs refused with 503 because the correction queue was full');
  readonly drift = new Gauge('sft_gauge_drifting', 'Per gauge: 1 when recent verification shows drift, else 0');

  render(extra: string[] = []): string {
    return [this.requests, this.latency, this.stage, this.runs, this.degraded, this.rejectedBusy, this.drift].map((m) => m.render()).concat(extra).join('\n') + '\n';
  }
}
