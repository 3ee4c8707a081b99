// /metrics through prom-client: the service's own metrics beside the default process, event-loop
// and GC metrics, in the Prometheus text exposition format.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
beforeAll(async () => {
  t = await makeTestApp();
});
afterAll(async () => t.close());

describe('/metrics', () => {
  it('has the service metrics and the process, event-loop and GC metrics', async () => {
    expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(201);
    await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}` });
    const res = await t.as('read', { method: 'GET', url: '/metrics' });
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/plain; version=0\.0\.4/);
    const m = res.body;
    // the service's own, names as before
    expect(m).toMatch(/^sft_http_requests_total\{method="GET",route="\/gauges\/:id",status="200"\} 1$/m);
    expect(m).toMatch(/^# TYPE sft_http_request_duration_seconds histogram$/m);
    expect(m).toMatch(/^sft_http_request_duration_seconds_bucket\{le="\+Inf",route="\/gauges\/:id"\} 1$/m);
    expect(m).toMatch(/^sft_model_cache_total\{result="hit"\} 0$/m);
    expect(m).toMatch(/^# TYPE sft_model_cache_total counter$/m);
    expect(m).toMatch(/^sft_correction_queue 0$/m);
    expect(m).toMatch(/^sft_event_subscribers 0$/m);
    expect(m).toMatch(new RegExp(`^sft_gauge_drifting\\{gauge="${riverGauge.id}"\\} 0$`, 'm'));
    for (const name of ['sft_correction_stage_seconds', 'sft_forecast_runs_total', 'sft_degraded_runs_total', 'sft_correction_rejected_busy_total']) {
      expect(m).toContain(`# HELP ${name} `);
    }
    // prom-client's defaults
    expect(m).toMatch(/^process_cpu_seconds_total \d/m);
    expect(m).toMatch(/^process_resident_memory_bytes \d/m);
    expect(m).toMatch(/^nodejs_eventloop_lag_seconds \d/m);
    expect(m).toMatch(/^nodejs_eventloop_lag_p99_seconds \d/m);
    expect(m).toMatch(/^# TYPE nodejs_gc_duration_seconds histogram$/m);
    expect(m).toMatch(/^nodejs_heap_size_used_bytes \d/m);

    // a deleted gauge drops out of the drift gauge
    await t.as('admin', { method: 'DELETE', url: `/gauges/${riverGauge.id}` });
    expect((await t.as('read', { method: 'GET', url: '/metrics' })).body).not.toContain(`gauge="${riverGauge.id}"`);
  });
});
