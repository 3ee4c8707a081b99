// The verification part of the gauge page against the real service: the demo scenario's archive
// loaded through the API, a model fitted, 40 past runs posted (their lead times already observed),
// then Debian's chromium (playwright-core) opens the gauge page and asks for the verification.
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { jobHandlers } from '../../src/jobs/handlers.ts';
import { JobRunner } from '../../src/jobs/runner.ts';
import { loadScenarioArchive } from '../../src/scenario/load-archive.ts';
import { buildScenario } from '../../src/scenario/scenario.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';
import { fitThroughApi, injectSend, scenarioRunBody } from '../helpers/scenario-send.ts';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
const OUT = join(import.meta.dirname, '..', 'output', 'screens');
const scenario = buildScenario({ seed: 13, years: 4, members: 8 });
const gaugeId = scenario.gauge.id;
const RUNS = 40;

let t: TestApp;
let browser: BrowserContext;
let base: string;
let userDataDir: string;

beforeAll(async () => {
  if (!hasChromium) return;
  t = await makeTestApp();
  await loadScenarioArchive(injectSend(t), scenario);
  const runner = new JobRunner(t.db, jobHandlers, { info() {}, warn() {}, error() {} } as never, 60_000);
  await fitThroughApi(t, runner, gaugeId);
  await runner.stop();
  // Past runs, one per day, ending well before the archive's end so every lead time is observed.
  const last = scenario.times.length - 30;
  for (let i = last - RUNS; i < last; i++) {
    const posted = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: scenarioRunBody(scenario.forecastRun(i)) });
    expect(posted.statusCode, posted.body).toBe(201);
  }
  await t.app.listen({ port: 0, host: '127.0.0.1' });
  base = `http://127.0.0.1:${(t.app.server.address() as { port: number }).port}`;
  userDataDir = mkdtempSync(join(tmpdir(), 'sft-verification-chromium-'));
  browser = await chromium.launchPersistentContext(userDataDir, {
    executablePath: CHROMIUM,
    headless: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    viewport: { width: 1200, height: 900 },
  });
  mkdirSync(OUT, { recursive: true });
}, 600_000);

afterAll(async () => {
  await browser?.close();
  await t?.close();
  if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
});

describe.skipIf(!hasChromium)('verification on the page served by the service', () => {
  it('shows the warning scores and pictures of the stored runs', async () => {
    const v = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/verification` })).json();
    expect(v.warningScores.runs).toBe(RUNS);
    expect(v.warningScores.cases).toBeGreaterThan(RUNS);
    const page = await browser.newPage();
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    await page.goto(`${base}/view/${gaugeId}#token=${t.tokens.read}`);
    await page.locator('#verification-load').click({ timeout: 30_000 });
    await expect.poll(() => page.locator('#reliability-svg').count(), { timeout: 60_000 }).toBe(1);
    expect(await page.locator('#verification-summary').textContent()).toContain(`${v.warningScores.runs} runs, ${v.warningScores.cases} verified lead times`);
    expect(await page.locator('#roc-svg path.roc-line').count()).toBe(3);
    expect(await page.locator('#crps-lead-svg path.score-line').count()).toBe(3);
    expect(await page.locator('#skill-lead-svg path.score-line').count()).toBe(2);
    const pit = await page.$$eval('#pit-svg .pit-bars rect', (rs) => rs.map((r) => Number(r.getAttribute('data-count'))));
    expect(pit).toEqual(v.comparison.stochastic.pitHistogram.counts);
    const rows = await page.$$eval('#warning-table tbody tr', (trs) => trs.map((r) => r.getAttribute('data-source')));
    expect(rows).toEqual(['stochastic', 'corrected', 'raw']);
    await page.locator('#verification').screenshot({ path: join(OUT, 'service-verification.png') });
    expect(errors).toEqual([]);
    await page.close();
  }, 120_000);
});
