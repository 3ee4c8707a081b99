import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createPrng } from '../../src/core/prng.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario, type Scenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend, scenarioRunBody, smallFit } from '../helpers/scenario-send.ts';

// A daily gauge with no past runs whose observations miss about one day in 50, fitted for the
// default horizon of 240 steps: the fit must either give an archive that serves runs or fail with
// its reason — never succeed and have every run fail.
let t: TestApp;
let runner: JobRunner;
const quiet = { info() {}, warn() {}, error() {} } as never;

/** The scenario with a share of its observed days removed at random (the gauge's own gaps kept). */
function withGaps(s: Scenario, share: number, seed: number): Scenario {
  const g = createPrng(seed);
  const observedFlow = s.observedFlow.map((v) => (g.nextFloat() < share ? null : v));
  return Object.assign(Object.create(Object.getPrototypeOf(s)), s, { observedFlow });
}

async function startFit(gaugeId: string, body: object) {
  const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: body });
  expect(started.statusCode, started.body).toBe(202);
  await runner.drain();
  return (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
}

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

describe('a gauge with scattered missing observations', () => {
  it('fits with 240-step templates, answers its runs, and verifies them', async () => {
    const scenario = withGaps(buildScenario({ seed: 13, years: 4, members: 4 }), 0.02, 1);
    await loadScenarioArchive(injectSend(t), scenario);
    const gaugeId = scenario.gauge.id;
    const job = await startFit(gaugeId, { ...smallFit, templateLength: 240 });
    expect(job.status, job.error).toBe('succeeded');
    const version = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${job.result.versionId}` })).json();
    const leadFree = version.archives.find((a: { kind: string; leadMode: string }) => a.kind === 'corrected' && a.leadMode === 'lead-free');
    expect(leadFree.templateLength).toBe(240);
    expect(leadFree.templates).toBeGreaterThanOrEqual(20);
    const last = scenario.times.length - 1;
    for (let i = 0; i < 6; i++) {
      const res = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: scenarioRunBody(scenario.forecastRun(last - 60 + 5 * i), { trajectories: 300 }) });
      expect(res.statusCode, res.body).toBe(201);
      expect(res.json().status).toBe('corrected');
    }
    const verification = await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification` });
    expect(verification.statusCode, verification.body).toBe(200);
    expect(JSON.stringify(verification.json())).toMatch(/crps/i);
  });

  it('a fit whose archive cannot make templates for the horizon fails with the reason', async () => {
    // One day in three missing: hardly any 240-day window misses at most 24 of its days.
    const base = buildScenario({ seed: 14, years: 4, members: 4 });
    const scenario = withGaps(base, 0.33, 2);
    await loadScenarioArchive(injectSend(t), scenario);
    const job = await startFit(scenario.gauge.id, { ...smallFit, templateLength: 240 });
    expect(job.status).toBe('failed');
    expect(job.error).toMatch(/Schaake templates of 240 steps/);
    expect(job.error).toMatch(/at least 20 are needed/);
  });
});
