// Every CSV the service writes is read as is by Python's csv module and by pandas (Debian's
// python3-pandas, through test/helpers/check_csv.py): the real header comes first, every row has
// its cells, and the caution travels in a column or a note row. Skipped, saying why, when Debian's
// python3 has no pandas (.ci/run installs it).
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/services/caution.ts';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody, smallFit } from '../helpers/scenario-send.ts';

const PYTHON = '/usr/bin/python3';
const probe = spawnSync(PYTHON, ['-c', 'import pandas'], { encoding: 'utf8' });
const noPandas = probe.status !== 0 ? `Debian's ${PYTHON} cannot import pandas (${(probe.error?.message ?? probe.stderr).trim().split('\n').at(-1)}); apt-get install -y python3-pandas` : null;
if (noPandas) console.warn(`csv-readers test skipped: ${noPandas}`);

let t: TestApp;
let runner: JobRunner;
let dir: string;
const scenario = buildScenario({ seed: 9, years: 4, members: 4 });
const g = scenario.gauge.id;
const quiet = { info() {}, warn() {}, error() {} } as never;
const last = scenario.times.length - 1;

describe.skipIf(noPandas !== null)('CSV outputs read by standard readers', () => {
  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'sft-csv-'));
    t = await makeTestApp();
    runner = new JobRunner(t.db, jobHandlers, quiet, 60_000);
    await loadScenarioArchive(injectSend(t), scenario, { reforecasts: true });
    await fitThroughApi(t, runner, g, smallFit);
  });
  afterAll(async () => {
    await runner?.stop();
    await t?.close();
    if (dir) rmSync(dir, { recursive: true, force: true });
  });

  it('every CSV answer parses with csv.DictReader and pandas.read_csv with no options', async () => {
    // Runs early enough that their lead times are observed, so verification has cases.
    let runId = '';
    for (const i of [last - 40, last - 30, last - 20]) {
      const res = await t.as('ingest', { method: 'POST', url: `/gauges/${g}/runs`, payload: scenarioRunBody(scenario.forecastRun(i), { trajectories: 200 }) });
      expect(res.statusCode, res.body).toBe(201);
      runId = res.json().id;
    }
    const hindcast = await t.as('admin', { method: 'POST', url: `/gauges/${g}/hindcasts`, payload: { trajectories: 100, everySteps: 20, sizeStudy: { repeats: 2 } } });
    expect(hindcast.statusCode, hindcast.body).toBe(202);
    await runner.drain();
    const h = hindcast.json().id;
    const window = `from=${scenario.times[last - 60]}&to=${scenario.times[last - 50]}`;
    const outputs: Record<string, string> = {
      'forecast-latest.csv': `/gauges/${g}/forecasts/latest?format=csv`,
      'forecast-run.csv': `/forecasts/${runId}?format=csv`,
      'forecast-quantiles.csv': `/forecasts/${runId}/quantiles?format=csv`,
      'observations.csv': `/gauges/${g}/observations?format=csv&${window}`,
      'forcings.csv': `/gauges/${g}/forcings?format=csv&${window}`,
      'simulations.csv': `/gauges/${g}/simulations?format=csv&${window}`,
      'reforecasts.csv': `/gauges/${g}/reforecasts?format=csv&${window}`,
      'verification.csv': `/gauges/${g}/verification?format=csv`,
      'hindcast-scores.csv': `/gauges/${g}/hindcasts/${h}?format=csv`,
      'hindcast-issues.csv': `/gauges/${g}/hindcasts/${h}/issues?format=csv`,
    };
    const sent: Record<string, { rows: number }> = {};
    for (const [file, url] of Object.entries(outputs)) {
      const res = await t.as('read', { method: 'GET', url });
      expect(res.statusCode, `${url}: ${res.body}`).toBe(200);
      expect(res.headers['content-type']).toContain('text/csv');
      writeFileSync(join(dir, file), res.body);
      const lines = res.body.trimEnd().split('\n');
      expect(lines[0].startsWith('#'), `${file} starts with a comment line`).toBe(false);
      sent[file] = { rows: lines.length - 1 };
    }
    const report = JSON.parse(execFileSync(PYTHON, [join(import.meta.dirname, '../helpers/check_csv.py'), dir], { encoding: 'utf8' }));
    for (const [file, seen] of Object.entries(report.files) as [string, Record<string, any>][]) {
      expect(seen.dictreader_header, file).toEqual(seen.pandas_columns);
      expect(seen.dictreader_rows, file).toBe(sent[file].rows);
      expect(seen.pandas_rows, file).toBe(sent[file].rows);
      expect(seen.dictreader_header[0], file).not.toMatch(/^#/);
      expect(seen.dictreader_rows, `${file} has data rows`).toBeGreaterThan(0);
    }
    expect(Object.keys(report.files).sort()).toEqual(Object.keys(outputs).sort());
    // The caution travels with every forecast and score output.
    for (const file of ['forecast-latest.csv', 'forecast-run.csv', 'forecast-quantiles.csv', 'verification.csv', 'hindcast-scores.csv', 'hindcast-issues.csv']) {
      expect(report.files[file].caution, file).toEqual([CAUTION]);
    }
  });
});
