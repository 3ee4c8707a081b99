// The page against the real service: archive loaded through the API, a model fitted, a raw run
// corrected and stored, then Debian's chromium (playwright-core) loads the page the service serves.
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
// Screenshots are test artefacts: test/output/screens/ (git-ignored), to look at after a run.
const OUT = join(import.meta.dirname, '..', 'output', 'screens');
const scenario = buildScenario({ seed: 11, years: 4, members: 8 });
const gaugeId = scenario.gauge.id;

let t: TestApp;
let browser: BrowserContext;
let base: string;
let userDataDir: string;

const runBody = (i: number) => scenarioRunBody(scenario.forecastRun(i));

beforeAll(async () => {
  if (!hasChromium) return;
  t = await makeTestApp();
  await loadScenarioArchive(injectSend(t), scenario);
  const runner = new JobRunner(t.db, jobHandlers, { info() {}, warn() {}, error() {} } as never, 60_000);
  await fitThroughApi(t, runner, gaugeId);
  await runner.stop();
  const posted = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: runBody(scenario.times.length - 15) });
  expect(posted.statusCode, posted.body).toBe(201);
  await t.app.listen({ port: 0, host: '127.0.0.1' });
  base = `http://127.0.0.1:${(t.app.server.address() as { port: number }).port}`;
  userDataDir = mkdtempSync(join(tmpdir(), 'sft-chromium-'));
  browser = await chromium.launchPersistentContext(userDataDir, {
    executablePath: CHROMIUM,
    headless: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    viewport: { width: 1200, height: 900 },
  });
  mkdirSync(OUT, { recursive: true });
}, 240_000);

afterAll(async () => {
  await browser?.close();
  await t?.close();
  if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
});

describe.skipIf(!hasChromium)('the forecast page served by the service', () => {
  it('shows the fan chart, thresholds, probabilities and caution of the stored run, and updates on a new run', async () => {
    const latest = (await t.as('read', { method: 'GET', url: `/gauges/${gaugeId}/forecasts/latest` })).json();
    const page = await browser.newPage();
    const errors: string[] = [];
    page.on('pageerror', (e) => errors.push(e.message));
    await page.goto(`${base}/view/${gaugeId}#token=${t.tokens.read}`);

    await expect.poll(() => page.locator('#caution').textContent(), { timeout: 15_000 }).toBe(latest.caution);
    expect(await page.locator('#caution').isVisible()).toBe(true);
    const svg = page.locator('#flow-svg');
    expect(await svg.locator('path.band').count()).toBe(3);
    expect(((await svg.locator('path.median').getAttribute('d')) ?? '').split('L')).toHaveLength(latest.leadTimes.length);
    expect(await svg.locator('.members.corrected path').count()).toBe(8);
    const labels = await svg.locator('.threshold-label').allTextContents();
    for (const th of latest.thresholds) expect(labels.some((l) => l.includes(th.label))).toBe(true);

    // The probability table shows the stored numbers (rounded to whole per cent).
    const rows = await page.$$eval('#forecast-table tbody tr', (trs) => trs.map((r) => [...r.children].map((c) => c.textContent ?? '')));
    expect(rows).toHaveLength(latest.leadTimes.length);
    rows.forEach((cells, k) => {
      latest.thresholds.forEach((th: { exceedance: number[] }, j: number) => {
        const shown = cells[4 + j].replace(/\u00a0/g, ' ').trim();
        const p = th.exceedance[k];
        if (shown === '<1 %') expect(p > 0 && p < 0.01).toBe(true);
        else if (shown === '>99 %') expect(p > 0.99).toBe(true);
        else expect(Math.abs(Number(shown.replace(' %', '')) - p * 100)).toBeLessThanOrEqual(0.5 + 1e-9);
      });
    });
    await page.screenshot({ path: join(OUT, 'service-gauge.png'), fullPage: true });

    // A new run announced through LISTEN/NOTIFY reaches the open page.
    const next = await t.as('ingest', { method: 'POST', url: `/gauges/${gaugeId}/runs`, payload: runBody(scenario.times.length - 14) });
    expect(next.statusCode).toBe(201);
    await expect.poll(() => page.locator(`time[datetime="${next.json().issueTime}"]`).count(), { timeout: 15_000 }).toBeGreaterThan(0);

    await page.goto(`${base}/`);
    await expect.poll(() => page.locator(`a[href="/view/${gaugeId}"]`).count(), { timeout: 15_000 }).toBeGreaterThan(0);
    await page.screenshot({ path: join(OUT, 'service-overview.png'), fullPage: true });
    expect(errors).toEqual([]);
    await page.close();
  });
});
