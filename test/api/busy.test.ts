import { Writable } from 'node:stream';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend } from '../helpers/scenario-send.ts';

// A queue of one: a second run arriving while one is being corrected gets 503 with Retry-After.
let t: TestApp;
const lines: { level: number; kind?: string; answeredSinceLastLine?: number }[] = [];
const logger = pino({ level: 'info' }, new Writable({ write(chunk, _e, done) { lines.push(JSON.parse(String(chunk))); done(); } }));
const scenario = buildScenario({ seed: 21, years: 3, members: 5 });
const gaugeId = scenario.gauge.id;

beforeAll(async () => {
  t = await makeTestApp({ CORRECTION_QUEUE: '1', WORKERS: '1', MAX_TRAJECTORIES: '100000' }, { logger });
  await loadScenarioArchive(injectSend(t), scenario);
  // No model: runs are corrected in degraded mode on the raw-error archive.
  const job = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/raw-archive`, payload: { templateLength: 20 } });
  expect(job.statusCode).toBe(202);
  const runner = new JobRunner(t.db, jobHandlers, { info() {}, warn() {}, error() {} } as never, 60_000);
  await runner.drain();
  await runner.stop();
  expect((await t.as('read', { method: 'GET', url: `/jobs/${job.json().id}` })).json().status).toBe('succeeded');
});
afterAll(async () => t?.close());

describe('a bounded correction queue', () => {
  it('answers 503 with Retry-After when full, and stores nothing for the refused runs', async () => {
    const last = scenario.times.length - 1;
    const posts = Array.from({ length: 6 }, (_, i) => {
      const run = scenario.forecastRun(last - 20 - i);
      return t.as('ingest', {
        method: 'POST',
        url: `/gauges/${gaugeId}/runs`,
        payload: { issueTime: run.issueTime, unit: 'm3/s', warmupSteps: run.warmupSteps, members: run.members.map((m) => ({ id: m.id, values: m.values })), trajectories: 50_000 },
      });
    });
    const answers = await Promise.all(posts);
    const busy = answers.filter((a) => a.statusCode === 503);
    const done = answers.filter((a) => a.statusCode === 201);
    expect(busy.length).toBeGreaterThan(0);
    expect(done.length).toBeGreaterThan(0);
    expect(busy.length + done.length).toBe(6);
    for (const b of busy) {
      expect(b.headers['retry-after']).toBe('2');
      expect(b.headers['content-type']).toContain('application/problem+json');
    }
    for (const d of done) expect(d.json().status).toBe('degraded');
    const { rows } = await t.db.query<{ n: number }>('select count(*)::int as n from forecast_runs');
    expect(Number(rows[0].n)).toBe(done.length);
    const metrics = (await t.as('read', { method: 'GET', url: '/metrics' })).body;
    expect(metrics).toMatch(new RegExp(`sft_correction_rejected_busy_total ${busy.length}`));
    // Refusals are logged at warn once per interval, never at error per request (issue 14).
    expect(lines.filter((l) => l.level >= 50)).toEqual([]);
    const warned = lines.filter((l) => l.kind === 'busy');
    expect(warned).toHaveLength(1);
    expect(warned[0].level).toBe(40);
  });
});
