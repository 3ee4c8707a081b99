import { collectDefaultMetrics, Counter, Gauge, Histogram, Registry } from 'prom-client';

/**
 * The service's metrics on a prom-client registry of their own (one per app, so tests and
 * several apps in one process do not share counts), beside prom-client's default process,
 * event-loop-lag and garbage-collection metrics.
 */
export class Metrics {
  readonly registry = new Registry();
  private readonly registers = [this.registry];

  readonly requests = new Counter({ name: 'sft_http_requests_total', help: 'HTTP requests by route, method and status code', labelNames: ['route', 'method', 'status'], registers: this.registers });
  readonly latency = new Histogram({ name: 'sft_http_request_duration_seconds', help: 'HTTP request latency by route', labelNames: ['route'], buckets: [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5], registers: this.registers });
  readonly stage = new Histogram({ name: 'sft_correction_stage_seconds', help: 'Time of each correction stage (features, inference, stochastic, total)', labelNames: ['stage'], buckets: [0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1], registers: this.registers });
  readonly runs = new Counter({ name: 'sft_forecast_runs_total', help: 'Corrected runs stored, by status (corrected or degraded)', labelNames: ['status'], registers: this.registers });
  readonly degraded = new Counter({ name: 'sft_degraded_runs_total', help: 'Runs served in degraded mode, by reason', labelNames: ['reason'], registers: this.registers });
  readonly rejectedBusy = new Counter({ name: 'sft_correction_rejected_busy_total', help: 'Runs refused with 503 because the correction queue was full', registers: this.registers });
  readonly drift = new Gauge({ name: 'sft_gauge_drifting', help: 'Per gauge: 1 when recent verification shows drift, else 0', labelNames: ['gauge'], registers: this.registers });

  constructor() {
    collectDefaultMetrics({ register: this.registry });
  }

  /**
   * Values read when scraped: the correction pool's model cache and queue, and the open event
   * streams. Counts kept elsewhere are copied in, so the types stay counter and gauge.
   */
  observe(sources: { cache: () => { hits: number; misses: number }; queue: () => number; subscribers: () => number }): void {
    new Counter({
      name: 'sft_model_cache_total',
      help: 'Correction requests whose worker already held the model (hit) or had to load it (miss)',
      labelNames: ['result'],
      registers: this.registers,
      collect() {
        const c = sources.cache();
        this.reset();
        this.inc({ result: 'hit' }, c.hits);
        this.inc({ result: 'miss' }, c.misses);
      },
    });
    new Gauge({ name: 'sft_correction_queue', help: 'Corrections waiting or running now', registers: this.registers, collect() { this.set(sources.queue()); } });
    new Gauge({ name: 'sft_event_subscribers', help: 'Open server-sent-event streams', registers: this.registers, collect() { this.set(sources.subscribers()); } });
  }

  render(): Promise<string> {
    return this.registry.metrics();
  }

  get contentType(): string {
    return this.registry.contentType;
  }
}
