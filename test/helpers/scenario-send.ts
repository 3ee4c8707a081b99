import { expect } from 'vitest';
import type { JobRunner } from '../../src/jobs/runner.ts';
import type { Send } from '../../src/scenario/load-archive.ts';
import type { ForecastRun } from '../../src/scenario/scenario.ts';
import type { TestApp } from './test-app.ts';

/** The scenario loader's Send, through fastify inject with the admin token. */
export function injectSend(t: TestApp): Send {
  return async (method, url, body) => {
    const res = await t.as('admin', { method, url, ...(body === undefined ? {} : { payload: body as object }) });
    return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
  };
}

/** Small, fast trees for tests that need a fitted model, not a good one. */
export const smallFit = { params: { nRounds: 60, learningRate: 0.15, maxDepth: 4, patience: 10 }, templateLength: 30, simLags: 5, forcingLags: 2 };

/** Starts a fit through the API, runs it with the given runner, and returns the finished job. */
export async function fitThroughApi(t: TestApp, runner: JobRunner, gaugeId: string, body: object = smallFit): Promise<{ id: string; result: { versionId: string } & Record<string, unknown> }> {
  const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: body });
  expect(started.statusCode, started.body).toBe(202);
  await runner.drain();
  const job = (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
  expect(job.status, job.error).toBe('succeeded');
  return job;
}

/** A scenario forecast run as the body of POST /gauges/:id/runs. */
export function scenarioRunBody(run: ForecastRun, extra: Record<string, unknown> = {}) {
  return {
    issueTime: run.issueTime,
    unit: 'm3/s',
    warmupSteps: run.warmupSteps,
    members: run.members.map((m) => ({ id: m.id, values: m.values })),
    forcings: { precipitation: run.forcings.precipitation, air_temperature: run.forcings.air_temperature },
    ...extra,
  };
}
