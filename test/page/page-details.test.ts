// Browser test of the page's details: the overview's columns fit at common desktop widths, the
// drift badge explains itself, times are shown in the gauge's time zone with UTC on hover, and the
// CSV links beside the tables download what the service answers. Debian's chromium driven by
// playwright-core against the stand-in service (test/page/fixture-server.ts).
import { existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeForecast } from './fixture.ts';
import { fixtureCsv, startFixtureServer, type FixtureServer, type GaugeEntry } from './fixture-server.ts';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
const OUT = join(import.meta.dirname, '..', 'output', 'screens');
const TOKEN = 'read-token-for-the-details-test';

// Long, realistic labels: the overview's columns must still fit.
const THRESHOLDS = [
  { label: 'Bankfull at the footbridge', value: 85.2 },
  { label: 'Minor flooding of the meadows', value: 121.5 },
  { label: 'Property flooding in the lower town', value: 164.8 },
];
const gauges: GaugeEntry[] = [
  // +05:30 all year, so the expected local times do not depend on daylight saving
  { id: 'corvane-at-ostrevale', name: 'Corvane at Ostrevale', timeZone: 'Asia/Kolkata', status: 'drifting', thresholds: THRESHOLDS, latest: null },
  { id: 'pellow-brook-at-quillbrae', name: 'Pellow Brook at Quillbrae', status: 'ok', thresholds: THRESHOLDS, latest: null },
  { id: 'tarnwick-beck', name: 'Tarnwick Beck', status: 'insufficient-data', thresholds: THRESHOLDS, latest: null },
  { id: 'merrow-water', name: 'Merrow Water at Hallowby Mill', status: 'no-forecast', thresholds: THRESHOLDS, latest: null },
];
gauges.forEach((g, i) => {
  if (g.status === 'no-forecast') return;
  // peaks high enough that some thresholds reach the attention level (the widest rows)
  g.latest = makeForecast({ gaugeId: g.id, gaugeName: g.name, issueTime: '2024-11-30T00:00:00Z', seed: 100 + i, base: 60, peak: 2.6 - i * 0.4, thresholds: THRESHOLDS });
});

let server: FixtureServer;
let context: BrowserContext;
let page: Page;
let userDataDir: string;
const problems: string[] = [];

beforeAll(async () => {
  if (!hasChromium) return;
  mkdirSync(OUT, { recursive: true });
  server = await startFixtureServer(TOKEN, gauges);
  userDataDir = mkdtempSync(join(tmpdir(), 'page-details-chromium-'));
  context = await chromium.launchPersistentContext(userDataDir, {
    executablePath: CHROMIUM,
    headless: true,
    acceptDownloads: true,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
    viewport: { width: 1200, height: 900 },
  });
  page = context.pages()[0] ?? (await context.newPage());
  page.on('pageerror', (err) => problems.push(`page error: ${err.message}`));
  page.on('console', (msg) => {
    if (msg.type() === 'error' && !/status of 404/.test(msg.text())) problems.push(`console: ${msg.text()}`);
  });
  await page.goto(`${server.url}/#token=${TOKEN}`);
  await page.locator('.card').first().waitFor();
}, 60_000);

afterAll(async () => {
  await context?.close();
  await server?.close();
  if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
});

describe.skipIf(!hasChromium)('page details in chromium', () => {
  for (const width of [1200, 1440, 1920]) {
    it(`shows the overview's "Any time" column whole at ${width} px`, async () => {
      await page.setViewportSize({ width, height: 1000 });
      await page.waitForTimeout(100);
      const boxes = await page.$$eval('.card', (cards) =>
        cards.map((card) => {
          const wrap = card.querySelector('.thr-wrap') as HTMLElement;
          const w = wrap.getBoundingClientRect();
          const cells = [...card.querySelectorAll('thead th:last-child, td.any')].map((c) => c.getBoundingClientRect());
          return { id: card.getAttribute('data-gauge'), wrap: { left: w.left, right: w.right }, scroll: wrap.scrollWidth - wrap.clientWidth, cells: cells.map((r) => ({ left: r.left, right: r.right, width: r.width })), viewport: document.documentElement.clientWidth };
        }),
      );
      expect(boxes).toHaveLength(gauges.length);
      for (const b of boxes) {
        expect(b.scroll, `${b.id}: the table scrolls sideways at ${width} px`).toBeLessThanOrEqual(0);
        expect(b.cells.length).toBe(THRESHOLDS.length + 1);
        for (const c of b.cells) {
          expect(c.width).toBeGreaterThan(0);
          expect(c.left, b.id!).toBeGreaterThanOrEqual(b.wrap.left - 0.5);
          expect(c.right, b.id!).toBeLessThanOrEqual(b.wrap.right + 0.5);
          expect(c.right, b.id!).toBeLessThanOrEqual(b.viewport);
        }
      }
      await page.screenshot({ path: join(OUT, `details-overview-${width}.png`), fullPage: true });
    });
  }

  it('explains the drift badge in words and on hover', async () => {
    const badge = page.locator('.card[data-gauge="corvane-at-ostrevale"] .badge');
    expect(await badge.textContent()).toBe('drifting');
    const title = (await badge.getAttribute('title')) ?? '';
    expect(title).toMatch(/verif/i);
    expect(title).toMatch(/refit|check/i);
    const visible = (await page.locator('.card[data-gauge="corvane-at-ostrevale"] .status-note').textContent()) ?? '';
    expect(visible).toMatch(/worse than/);
    for (const id of ['pellow-brook-at-quillbrae', 'tarnwick-beck', 'merrow-water']) {
      expect(((await page.locator(`.card[data-gauge="${id}"] .badge`).getAttribute('title')) ?? '').length, id).toBeGreaterThan(20);
    }
  });

  it("shows times in the gauge's time zone, with UTC on hover", async () => {
    // overview: 2024-11-30T00:00Z is 05:30 in Asia/Kolkata (UTC+05:30)
    const local = page.locator('.card[data-gauge="corvane-at-ostrevale"] time');
    expect(await local.getAttribute('datetime')).toBe('2024-11-30T00:00:00Z');
    expect(((await local.textContent()) ?? '').replace(/\u00a0/g, ' ')).toMatch(/^30 Nov 2024 05:30 (GMT\+5:30|IST)$/);
    expect(await local.getAttribute('title')).toBe('30 Nov 2024 00:00 UTC');
    expect((await page.locator('.card[data-gauge="pellow-brook-at-quillbrae"] time').textContent()) ?? '').toBe('30 Nov 2024 00:00 UTC');

    // gauge view: the facts and each valid time of the table
    await page.goto(`${server.url}/view/corvane-at-ostrevale`);
    await page.locator('#forecast-table tbody tr').first().waitFor();
    await expect.poll(() => page.locator('#forecast-table thead').textContent()).toMatch(/Valid time \(Asia\/Kolkata\)/);
    const f = gauges[0].latest!;
    const cells = await page.$$eval('#forecast-table tbody td.when time', (ts) => ts.map((t) => ({ text: t.textContent, iso: t.getAttribute('datetime'), title: t.getAttribute('title') })));
    expect(cells).toHaveLength(f.validTimes.length);
    cells.forEach((c, k) => {
      expect(c.iso).toBe(f.validTimes[k]);
      const d = new Date(Date.parse(f.validTimes[k]) + 5.5 * 3_600_000); // worked by hand: UTC+05:30
      expect(c.text).toBe(`${d.getUTCDate()} ${['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'][d.getUTCMonth()]} ${String(d.getUTCHours()).padStart(2, '0')}:${String(d.getUTCMinutes()).padStart(2, '0')}`);
      expect(c.title).toMatch(/ UTC$/);
    });
    const issue = page.locator('.facts time').first();
    expect(await issue.getAttribute('title')).toBe('30 Nov 2024 00:00 UTC');
    expect(((await issue.textContent()) ?? '').replace(/\u00a0/g, ' ')).toMatch(/^30 Nov 2024 05:30 (GMT\+5:30|IST)$/);
  });

  it('puts a CSV link beside the numbers that downloads what the service answers', async () => {
    const link = page.locator('a.csv[data-for="forecast-table"]');
    expect(await link.getAttribute('href')).toBe('/gauges/corvane-at-ostrevale/forecasts/latest?format=csv');
    const [download] = await Promise.all([page.waitForEvent('download'), link.click()]);
    expect(download.suggestedFilename()).toBe('corvane-at-ostrevale-forecast.csv');
    const path = await download.path();
    expect(readFileSync(path, 'utf8')).toBe(fixtureCsv(gauges[0].latest!));
    // the token travelled in a header, never in the address
    expect(server.seen.some((u) => u.includes(TOKEN))).toBe(false);

    await page.goto(`${server.url}/`);
    await page.locator('.card').first().waitFor();
    const overviewLink = page.locator('.card[data-gauge="pellow-brook-at-quillbrae"] a.csv');
    expect(await overviewLink.getAttribute('href')).toBe('/gauges/pellow-brook-at-quillbrae/forecasts/latest?format=csv');
    expect(await page.locator('.card[data-gauge="merrow-water"] a.csv').count()).toBe(0);
    expect(problems).toEqual([]);
  });
});
