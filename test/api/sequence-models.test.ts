import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { archiveFromBytes } from '../../src/core/stochastic/archive-codec.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { versionArchive } from '../../src/store/models-repo.ts';
import { injectSend, scenarioRunBody } from '../helpers/scenario-send.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';

// Sequence residual models (LSTM, GRU) through the API: uploads of PyTorch exports
// (test/fixtures/torch-lstm/make.py, python3-torch 1.13.0a0 + python3-onnx 1.12.0) and the
// in-house LSTM trainer as a fit job.
let t: TestApp;
let runner: JobRunner;
const scenario = buildScenario({ seed: 4, years: 4, members: 6 });
const gaugeId = scenario.gauge.id;
const lastIndex = scenario.times.length - 1;
const quiet = { info() {}, warn() {}, error() {} } as never;
const fixture = (name: string) => readFileSync(`test/fixtures/torch-lstm/${name}`);
const uploadSpec = JSON.parse(fixture('upload-spec.json').toString('utf8'));
const lstmOnnx = fixture('lstm-upload.onnx').toString('base64');
const gruOnnx = fixture('gru-upload.onnx').toString('base64');
const smallLstm = { trainer: 'lstm', params: { hidden: 4, window: 6, epochs: 4, learningRate: 0.01 }, maxTrainRows: 3000, templateLength: 30 };

beforeAll(async () => {
  t = await makeTestApp();
  runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
  // With past runs, so fits and uploads also build per-lead archives from windows of the reforecasts.
  await loadScenarioArchive(injectSend(t), scenario, { reforecasts: true });
});
afterAll(async () => {
  await runner.stop();
  await t.close();
});

const versions = async () => (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models` })).json().versions.length as number;
const upload = (payload: object) => t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/upload`, payload });

describe('uploading a PyTorch LSTM or GRU taking [N, window, steps]', () => {
  it.each([
    ['LSTM', lstmOnnx],
    ['GRU', gruOnnx],
  ])('%s: checked on archive windows, stored with its spec, activated, then serves a run', async (name, onnxBase64) => {
    const res = await upload({ label: `partner ${name}`, featureSpec: uploadSpec, onnxBase64, templateLength: 30, activate: true });
    expect(res.statusCode, res.body).toBe(201);
    const v = res.json();
    expect(v).toMatchObject({ origin: 'uploaded', active: true, parts: 1 });
    expect(v.featureSpec).toEqual(uploadSpec);
    expect(v.scores.cases).toBeGreaterThan(1000);
    expect(archiveFromBytes((await versionArchive(t.db, v.id, 'corrected'))!.bytes).templateLength).toBe(30);

    // The scenario's runs carry 10 warm-up values; the window needs 7 before issue time.
    const run = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: scenarioRunBody(scenario.forecastRun(lastIndex - 30 - (name === 'GRU' ? 1 : 0))) });
    expect(run.statusCode, run.body).toBe(201);
    const body = run.json();
    expect(body.status).toBe('corrected');
    expect(body.modelVersion.id).toBe(v.id);
    expect(body.caution).toMatch(/responsible local authority/);
    expect(body.ensemble.corrected).toHaveLength(6);
    for (const m of body.ensemble.corrected as { values: number[] }[]) for (const x of m.values) expect(Number.isFinite(x) && x >= 0).toBe(true);
  });

  it('serves a run whose warm-up is shorter than the window from the archived simulations', async () => {
    const res = await upload({ label: 'wide window', featureSpec: { ...uploadSpec }, onnxBase64: lstmOnnx, templateLength: 30, activate: true });
    expect(res.statusCode, res.body).toBe(201);
    const full = scenario.forecastRun(lastIndex - 40);
    // Only 2 warm-up values: the window of 8 needs 7 at or before issue time; 5 come from the archive.
    const short = { ...full, warmupSteps: 2, members: full.members.map((m) => ({ ...m, values: m.values.slice(full.warmupSteps - 2) })), forcings: { precipitation: full.forcings.precipitation.slice(full.warmupSteps - 2), air_temperature: full.forcings.air_temperature.slice(full.warmupSteps - 2) } };
    const a = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: { ...scenarioRunBody(short as never), source: 'short' } });
    const b = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: { ...scenarioRunBody(full), source: 'full' } });
    expect(a.statusCode, a.body).toBe(201);
    expect(b.statusCode, b.body).toBe(201);
    expect([a.json().status, b.json().status]).toEqual(['corrected', 'corrected']);
    expect(a.json().modelVersion.id).toBe(res.json().id);
    // The scenario's warm-up values are the members' continuous simulations, so both give the same correction.
    expect(a.json().ensemble.corrected).toEqual(b.json().ensemble.corrected);

    // Before the archive starts there is nothing to lengthen the run with: the member is named.
    // A run issued on the archive's fourth day: its 8-step window reaches two days before the archive starts.
    const cut = (v: (number | null)[]) => v.slice(2, 14);
    const early = {
      issueTime: scenario.times[3],
      unit: 'm3/s',
      warmupSteps: 2,
      source: 'early',
      members: scenario.memberIds.map((id) => ({ id, values: cut(scenario.memberSimulations[id]) })),
      forcings: { precipitation: cut(scenario.forcings.precipitation), air_temperature: cut(scenario.forcings.air_temperature) },
    };
    const refused = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: early });
    expect(refused.statusCode, refused.body).toBe(422);
    expect(refused.json().errors[0].path).toBe('body.members[0].values');
    expect(refused.json().errors[0].message).toMatch(/neither the run nor the stored archive has one at \d{4}-/);
  });

  it.each([
    ['a window the model does not take', { ...uploadSpec, window: 10 }, lstmOnnx, /must be float \[N, 10, 3\]/],
    ['a flat feature spec for a sequence model', { version: 1, stepSeconds: 86400, simLags: 9, forcings: [], seasonal: false, leadTime: false, issueError: false }, lstmOnnx, /must be float \[N, 10\]/],
    ['a sequence spec for a flat model', { ...uploadSpec, window: 1, steps: uploadSpec.steps.slice(0, 1) }, readFileSync('test/fixtures/torch-mlp/model.onnx').toString('base64'), /must be float \[N, 1, 1\]/],
  ])('refuses %s, naming the file, and stores nothing', async (_name, featureSpec, onnxBase64, message) => {
    const before = await versions();
    const res = await upload({ label: 'x', featureSpec, onnxBase64 });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].path).toBe('body.onnxBase64');
    expect(res.json().errors[0].message).toMatch(message);
    expect(await versions()).toBe(before);
  });

  it('names a bad field of a sequence spec', async () => {
    const res = await upload({ label: 'x', featureSpec: { ...uploadSpec, steps: [{ name: 'sim', scale: 0 }] }, onnxBase64: lstmOnnx });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0].path).toBe('body.featureSpec.steps[0].scale');
    const forcing = await upload({ label: 'x', featureSpec: { ...uploadSpec, steps: [...uploadSpec.steps.slice(0, 2), { name: 'snow_depth' }] }, onnxBase64: lstmOnnx });
    expect(forcing.statusCode).toBe(409);
    expect(forcing.json().detail).toMatch(/snow_depth/);
  });
});

describe('the in-house LSTM as a fit job', () => {
  it('trains with early stopping, exports to the ONNX LSTM operator, checks it, stores and serves it', async () => {
    // Updating on at every lead, so the run below is updated through the sequence model's window at the observation.
    const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { ...smallLstm, updating: { mode: 'on' } } });
    expect(started.statusCode, started.body).toBe(202);
    await runner.drain();
    const job = (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
    expect(job.status, job.error).toBe('succeeded');
    expect(job.percent).toBe(100);
    expect(job.result.onnxCheck.maxRelativeError).toBeLessThanOrEqual(1e-5);
    const v = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${job.result.versionId}` })).json();
    expect(v).toMatchObject({ origin: 'fitted', active: true, parts: 1 });
    expect(v.featureSpec).toMatchObject({ kind: 'sequence', window: 6 });
    expect(v.featureSpec.steps.map((s: { name: string }) => s.name)).toEqual(['sim', 'air_temperature', 'precipitation', 'day_of_year_sin', 'day_of_year_cos']);
    expect(v.trainer).toMatchObject({ kind: 'lstm' });
    expect(v.trainer.model.epochs).toBeGreaterThan(0);
    // Issue-time updating is fitted for the LSTM as for the trees: its candidates scored on pseudo-forecasts.
    expect(v.scores.updating.candidates.map((c: { name: string }) => c.name)).toEqual(expect.arrayContaining(['none', 'ar1', 'phi-per-lead']));
    expect(v.scores.updating.leads.length).toBeGreaterThan(0);
    // The scenario's raw members are biased, so the residual stage must improve them on the held-out period.
    expect(v.scores.residualRmse.after).toBeLessThan(v.scores.residualRmse.before);

    const run = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: { ...scenarioRunBody(scenario.forecastRun(lastIndex - 50)), source: 'lstm' } });
    expect(run.statusCode, run.body).toBe(201);
    expect(run.json()).toMatchObject({ status: 'corrected', modelVersion: { id: v.id } });
    // Updated on the observation at issue time, from the archive of updated members.
    expect(v.scores.updating.status).toBe('on');
    expect(run.json().updating).toMatchObject({ status: 'on', observation: { ageSteps: 0 } });
    expect(run.json().errorArchive).toMatchObject({ leadMode: 'updating' });

    // A hindcast of the LSTM version over its validation period, like any other version's.
    const h = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/hindcasts`, payload: { version: v.id, trajectories: 100 } });
    expect(h.statusCode, h.body).toBe(202);
    await runner.drain();
    const done = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts/${h.json().id}` })).json();
    expect(done.status, done.error).toBe('succeeded');
    expect(done.result).toMatchObject({ mode: 'simulation', modelVersion: { id: v.id }, correction: 'per-valid-time' });
    expect(done.result.issues.used).toBeGreaterThan(100);
    expect(done.result.comparison.corrected.crps.crps).toBeLessThan(done.result.comparison.raw.crps.crps);

    // The per-lead archive came from windows over the past runs, and a reforecast-mode hindcast reads them per issue.
    expect(v.scores.reforecasts.perLeadArchive).toMatchObject({ stored: true });
    const hr = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/hindcasts`, payload: { version: v.id, mode: 'reforecast', trajectories: 100 } });
    expect(hr.statusCode, hr.body).toBe(202);
    await runner.drain();
    const doneR = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/hindcasts/${hr.json().id}` })).json();
    expect(doneR.status, doneR.error).toBe('succeeded');
    expect(doneR.result).toMatchObject({ mode: 'reforecast', correction: 'per-issue' });
    expect(doneR.result.issues.used).toBeGreaterThan(20);
  });

  it('tunes hidden size, window and learning rate by Bayesian optimisation', async () => {
    const started = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { ...smallLstm, params: { epochs: 2 }, tuning: { evaluations: 3, initial: 2 }, activate: false } });
    expect(started.statusCode, started.body).toBe(202);
    await runner.drain();
    const job = (await t.as('read', { method: 'GET', url: `/jobs/${started.json().id}` })).json();
    expect(job.status, job.error).toBe('succeeded');
    const v = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/models/${job.result.versionId}` })).json();
    expect(v.trainer.trials).toHaveLength(3);
    for (const trial of v.trainer.trials) expect(Object.keys(trial.params)).toEqual(expect.arrayContaining(['hidden', 'window', 'learningRate']));
    const best = Math.min(...v.trainer.trials.map((x: { validationRmse: number }) => x.validationRmse));
    expect(v.trainer.model.validationRmse).toBe(best);
    expect(v.featureSpec.window).toBe(v.trainer.trials.find((x: { validationRmse: number }) => x.validationRmse === best).params.window);
  });

  it('cancels a running LSTM fit', async () => {
    const job = (await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { ...smallLstm, params: { hidden: 16, window: 10, epochs: 200, patience: 200 } } })).json();
    const running = runner.drain();
    for (let i = 0; i < 400; i++) {
      const j = (await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json();
      if (j.stage.startsWith('training')) break;
      await new Promise((r) => setTimeout(r, 50));
    }
    await t.as('admin', { method: 'POST', url: `/jobs/${job.id}/cancel` });
    await running;
    expect((await t.as('read', { method: 'GET', url: `/jobs/${job.id}` })).json().status).toBe('cancelled');
  });

  it('refuses parameters of another trainer, naming them', async () => {
    const res = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { trainer: 'lstm', params: { nRounds: 10 } } });
    expect(res.statusCode).toBe(422);
    expect(res.json().errors[0]).toMatchObject({ path: 'body.params.nRounds' });
    expect(res.json().errors[0].message).toMatch(/not a lstm parameter/);
    const bundle = await t.as('admin', { method: 'POST', url: `/gauges/${gaugeId}/models/fit`, payload: { trainer: 'lstm', bundle: 3 } });
    expect(bundle.statusCode).toBe(422);
    expect(bundle.json().errors[0].path).toBe('body.bundle');
  });
});
