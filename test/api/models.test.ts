import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { archiveFromBytes } from '../../src/core/stochastic/archive-codec.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { versionArchive } from '../../src/store/models-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { injectSend } from '../helpers/scenario-send.ts';

let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 3, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  await loadScenarioArchive(injectSend(t), scenario);
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

const fitBody = { params: { nRounds: 60, learningRate: 0.15, maxDepth: 4, patience: 10 }, templateLength: 30, simLags: 5, forcingLags: 2 };

describe('fitting residual models as background jobs', () => {
  let versionId: string;

  it('answers at once with a job, fits, exports to ONNX, stores and activates a version', async () => {
    const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: fitBody });
    expect(started.statusCode).toBe(202);
    const job = started.json();
    expect(job).toMatchObject({ kind: 'fit', status: 'queued', gaugeId });
    expect(started.headers.location).toBe(`/jobs/${job.id}`);

    await runner.drain();
    const done = (await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json();
    expect(done.status, done.error).toBe('succeeded');
    expect(done.percent).toBe(100);
    expect(done.result.onnxCheck).toMatchObject({ mismatches: 0 });
    versionId = done.result.versionId;

    const version = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${versionId}` })).json();
    expect(version).toMatchObject({ origin: 'fitted', active: true, parts: 1 });
    expect(version.featureSpec).toMatchObject({ version: 1, stepSeconds: 86400, simLags: 5 });
    expect(version.periods.calibration.to <= version.periods.validation.from).toBe(true);
    // The scenario's raw members are biased, so the residual stage must improve them on the held-out period.
    expect(version.scores.residualRmse.after).toBeLessThan(version.scores.residualRmse.before);
    expect(version.scores.ensembleMean.nseAfter).toBeGreaterThan(version.scores.ensembleMean.nseBefore);

    const archive = await versionArchive(t.db, versionId, 'corrected');
    const decoded = archiveFromBytes(archive!.bytes);
    expect(decoded.templateLength).toBe(30);
    expect(decoded.predictor.length).toBeGreaterThan(1000);
  });

  it('lists versions, activates and rolls back', async () => {
    const second = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { ...fitBody, trainer: 'random-forest', params: { nTrees: 20, maxDepth: 6 } } });
    await runner.drain();
    const secondJob = (await t.as('read', { method: 'GET', url: `/jobs/${second.json().id}` })).json();
    expect(secondJob.status, secondJob.error).toBe('succeeded');
    const list = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models` })).json();
    expect(list.versions).toHaveLength(2);
    expect(list.versions.filter((v: { active: boolean }) => v.active)).toHaveLength(1);
    expect(list.versions[0].active).toBe(true);

    const back = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/rollback` });
    expect(back.statusCode).toBe(200);
    expect(back.json().active.id).toBe(versionId);
    const again = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/${secondJob.result.versionId}/activate` });
    expect(again.json()).toMatchObject({ id: secondJob.result.versionId, active: true });
  });

  it('cancels a queued job at once', async () => {
    const job = (await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: fitBody })).json();
    const cancelled = await t.as('admin', { method: 'POST', url: `/jobs/${job.id}/cancel` });
    expect(cancelled.json().status).toBe('cancelled');
    await runner.drain();
    expect((await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json().status).toBe('cancelled');
  });

  it('cancels a running fit', async () => {
    const job = (await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { ...fitBody, params: { nRounds: 5000, learningRate: 0.01, maxDepth: 6, patience: 0 } } })).json();
    const running = runner.drain();
    for (let i = 0; i < 200; i++) {
      const j = (await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json();
      if (j.stage === 'training') break;
      await new Promise((r) => setTimeout(r, 50));
    }
    await t.as('admin', { method: 'POST', url: `/jobs/${job.id}/cancel` });
    await running;
    const end = (await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json();
    expect(end.status).toBe('cancelled');
  });

  it('marks a job whose instance stopped as failed instead of losing it', async () => {
    const { rows } = await t.db.query<{ id: string }>(
      `insert into jobs (kind, gauge_id, params, status, heartbeat_at, started_at) values ('fit', $1, '{}', 'running', now() - interval '10 minutes', now() - interval '11 minutes') returning id::text as id`,
      [gaugeId],
    );
    const fresh = new JobRunner(t.db, jobHandlers, quiet, 60_000);
    await fresh.start();
    await fresh.stop();
    const job = (await t.as('read', { method: 'GET', url: `/jobs/${rows[0].id}` })).json();
    expect(job.status).toBe('failed');
    expect(job.error).toMatch(/interrupted/);
  });

  it('refuses bad fit requests with the field named', async () => {
    const res = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { trainer: 'neural-net', bundle: 0 } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors.map((e: { path: string }) => e.path)).toEqual(expect.arrayContaining(['body.trainer', 'body.bundle']));
    const wrongParam = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { trainer: 'random-forest', params: { learningRate: 0.1 } } });
    expect(wrongParam.statusCode).toBe(422);
    expect(wrongParam.json().errors[0]).toMatchObject({ path: 'body.params.learningRate' });
    expect(wrongParam.json().errors[0].message).toMatch(/not a random-forest parameter/);
    // Box–Cox with λ < 0 is refused by the request, before any training.
    const negativeLambda = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { transform: { kind: 'boxcox', lambda: -0.5 } } });
    expect(negativeLambda.statusCode).toBe(422);
    expect(negativeLambda.json().errors[0]).toMatchObject({ path: 'body.transform.lambda' });
    expect(negativeLambda.json().errors[0].message).toMatch(/λ ≥ 0/);
  });
});

describe('models trained elsewhere', () => {
  // The fixture is a PyTorch MLP exported to ONNX (test/fixtures/torch-mlp/make.py, python3-torch 1.13).
  const mlp = readFileSync('test/fixtures/torch-mlp/model.onnx');
  const spec = { version: 1, stepSeconds: 86400, simLags: 9, forcings: [{ name: 'precipitation', lags: 1 }], seasonal: false, leadTime: false, issueError: false };

  it('accepts an ONNX model with its feature spec after running it on archive rows', async () => {
    const res = await t.as('admin', {
      method: 'POST',
      url: `/gauges/${gaugeId}/models/upload`,
      payload: { label: 'partner MLP', featureSpec: spec, onnxBase64: mlp.toString('base64'), templateLength: 30 },
    });
    expect(res.statusCode, res.body).toBe(201);
    const v = res.json();
    expect(v).toMatchObject({ origin: 'uploaded', active: false, parts: 1, featureSpec: spec });
    expect(v.scores.cases).toBeGreaterThan(1000);
    expect(await versionArchive(t.db, v.id, 'corrected')).not.toBeNull();
    // Issue-time updating is fitted for an upload too (auto by default), closed-form candidates only.
    expect(v.scores.updating.candidates.map((c: { name: string }) => c.name)).toEqual(['none', 'ar1', 'phi-per-lead']);
    expect((await versionArchive(t.db, v.id, 'corrected', 'updating')) !== null).toBe(v.scores.updating.status === 'on');
  });

  it('refuses an upload whose updating: on cannot be fitted, naming body.updating.mode, and stores nothing; auto stores it without', async () => {
    // A 60-day validation period: enough for the 30-step archive, too short for the updater (10 per lead time).
    const n = scenario.times.length;
    const validation = { from: scenario.times[n - 61], to: scenario.times[n - 1] };
    const versions = async () => (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models` })).json().versions.length;
    const before = await versions();
    const payload = { label: 'short', featureSpec: spec, onnxBase64: mlp.toString('base64'), templateLength: 30, validation };
    const on = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/upload`, payload: { ...payload, updating: { mode: 'on' } } });
    expect(on.statusCode, on.body).toBe(422);
    expect(on.headers['content-type']).toContain('application/problem+json');
    expect(on.json().errors[0]).toMatchObject({ path: 'body.updating.mode', message: expect.stringMatching(/updating: on was asked for, but .*observed steps/) });
    expect(await versions()).toBe(before);
    const auto = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/upload`, payload });
    expect(auto.statusCode, auto.body).toBe(201);
    expect(auto.json().scores.updating).toMatchObject({ status: 'off', reason: expect.stringMatching(/observed steps/) });
  });

  it('fits no updater for an upload that asks for none, and says so', async () => {
    const res = await t.as('admin', {
      method: 'POST',
      url: `/gauges/${gaugeId}/models/upload`,
      payload: { label: 'partner MLP, no updating', featureSpec: spec, onnxBase64: mlp.toString('base64'), templateLength: 30, updating: { mode: 'off' } },
    });
    expect(res.statusCode, res.body).toBe(201);
    expect(res.json().scores.updating).toEqual({ status: 'off', reason: 'updating: off was asked for' });
    expect(await versionArchive(t.db, res.json().id, 'corrected', 'updating')).toBeNull();
  });

  it.each([
    ['a spec whose feature count does not match the model', { ...spec, simLags: 4 }, mlp.toString('base64'), /float \[N, 7\]/],
    ['bytes that are not ONNX', spec, Buffer.from('not a model at all').toString('base64'), /ONNX/],
    ['a sequence model the feature rows cannot feed', spec, readFileSync('test/fixtures/torch-mlp/lstm.onnx').toString('base64'), /must be float \[N, 12\]/],
  ])('refuses %s', async (_name, featureSpec, onnxBase64, message) => {
    const before = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models` })).json().versions.length;
    const res = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/upload`, payload: { label: 'x', featureSpec, onnxBase64 } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].path).toBe('body.onnxBase64');
    expect(res.json().errors[0].message).toMatch(message);
    expect((await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models` })).json().versions.length).toBe(before);
  });

  it('names a bad feature spec field', async () => {
    const res = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/upload`, payload: { label: 'x', featureSpec: { ...spec, simLags: -1 }, onnxBase64: mlp.toString('base64') } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].path).toBe('body.featureSpec.simLags');
  });
});
