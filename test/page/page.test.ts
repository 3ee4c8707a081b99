// Browser test of the forecast page: Debian's chromium driven by playwright-core against a stand-in
// service (test/page/fixture-server.ts) that answers in the forecast read contract's shape.
// The checks compare what the page shows with the JSON it was given; no outside values are involved.
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeForecast, type Forecast } from './fixture.ts';
import { startFixtureServer, type FixtureServer, type GaugeEntry } from './fixture-server.ts';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
if (!hasChromium) console.warn(`page test skipped: ${CHROMIUM} is missing (Debian: apt-get install chromium)`);

// Screenshots are test artefacts: test/output/screens/ (git-ignored), to look at after a run.
const OUT = join(import.meta.dirname, '..', 'output', 'screens');
const TOKEN = 'read-token-for-the-page-test';
const RIVER = { id: 'corvane-stillmere-bridge', name: 'Corvane at Stillmere Bridge' };
const BROOK = { id: 'pellow-brook-at-quillbrae', name: 'Pellow Brook at Quillbrae' };
const FELL = { id: 'tarnwick-beck', name: 'Tarnwick Beck at Ostrevale' };
const RIVER_THRESHOLDS = [
  { label: '2-year flow', value: 85.2 },
  { label: '10-year flow', value: 121.5 },
  { label: '50-year flow', value: 164.8 },
];
const BROOK_THRESHOLDS = [
  { label: '2-year flow', value: 14.6 },
  { label: '10-year flow', value: 22.3 },
];

const riverRun = (issueTime: string, seed: number, peak: number) =>
  makeForecast({ gaugeId: RIVER.id, gaugeName: RIVER.name, issueTime, seed, base: 42, peak, thresholds: RIVER_THRESHOLDS });

let server: FixtureServer;
let context: BrowserContext;
let page: Page;
let userDataDir: string;
const problems: string[] = [];

function watch(p: Page) {
  p.on('pageerror', (err) => problems.push(`page error: ${err.message}`));
  p.on('console', (msg) => {
    // 401 answers are part of the token test and a 404 from a gauge without a forecast is expected;
    // anything else logged as an error (a script error, a resource blocked by the CSP) is a fault.
    if (msg.type() !== 'error') return;
    const from = msg.location().url;
    if (/status of 401/.test(msg.text())) return;
    if (/status of 404/.test(msg.text()) && from.endsWith(`/gauges/${FELL.id}/forecasts/latest`)) return;
    problems.push(`console: ${msg.text()} (${from})`);
  });
}

/** Shown numbers must equal the JSON's up to the rounding of the digits shown. */
function expectFlow(text: string, value: number | null) {
  if (value === null) return expect(text.trim()).toBe('–');
  const shown = text.trim();
  const decimals = shown.includes('.') ? shown.split('.')[1].length : 0;
  expect(Math.abs(Number(shown) - value)).toBeLessThanOrEqual(0.5 * 10 ** -decimals + 1e-9);
}

function expectProb(text: string, p: number) {
  const shown = text.replace(/\u00a0/g, ' ').trim();
  if (shown === '<1 %') return expect(p > 0 && p < 0.01).toBe(true);
  if (shown === '>99 %') return expect(p > 0.99 && p < 1).toBe(true);
  const m = /^(\d+) %$/.exec(shown);
  expect(m, `probability text "${shown}"`).not.toBeNull();
  expect(Math.abs(Number(m![1]) - p * 100)).toBeLessThanOrEqual(0.5 + 1e-9);
}

async function tableTimes(p: Page): Promise<(string | null)[]> {
  return p.$$eval('#forecast-table tbody tr td.when time', (ts) => ts.map((t) => t.getAttribute('datetime')));
}

async function tableRows(p: Page): Promise<string[][]> {
  return p.$$eval('#forecast-table tbody tr', (rows) => rows.map((r) => [...r.children].map((c) => c.textContent ?? '')));
}

function checkTable(rows: string[][], f: Forecast) {
  const iMed = f.quantiles.probabilities.indexOf(0.5);
  const iLo = f.quantiles.probabilities.indexOf(0.05);
  const iHi = f.quantiles.probabilities.indexOf(0.95);
  expect(rows.length).toBe(f.leadTimes.length);
  rows.forEach((cells, j) => {
    expect(cells[0].replace(/\u00a0/g, ' ')).toBe(`${j + 1} d`); // leadTimes are P1D, P2D, …
    expectFlow(cells[2], f.quantiles.values[iMed][j]);
    const [lo, hi] = cells[3].split(' – ');
    expectFlow(lo, f.quantiles.values[iLo][j]);
    expectFlow(hi, f.quantiles.values[iHi][j]);
    f.thresholds.forEach((t, k) => expectProb(cells[4 + k], t.exceedance[j]));
  });
}

describe.skipIf(!hasChromium)('forecast page in chromium', () => {
  beforeAll(async () => {
    mkdirSync(OUT, { recursive: true });
    const gauges: GaugeEntry[] = [
      { ...RIVER, status: 'ok', thresholds: RIVER_THRESHOLDS, latest: riverRun('2024-11-30T00:00:00Z', 4242, 2.1) },
      {
        ...BROOK,
        status: 'drifting',
        thresholds: BROOK_THRESHOLDS,
        latest: makeForecast({
          gaugeId: BROOK.id,
          gaugeName: BROOK.name,
          issueTime: '2024-11-30T00:00:00Z',
          seed: 77,
          base: 6.5,
          peak: 1.4,
          thresholds: BROOK_THRESHOLDS,
          degradedReason: 'no active residual model for this gauge',
        }),
      },
      { ...FELL, status: 'no-forecast', thresholds: [{ label: '2-year flow', value: 30 }], latest: null },
    ];
    server = await startFixtureServer(TOKEN, gauges);
    userDataDir = mkdtempSync(join(tmpdir(), 'page-test-chromium-'));
    context = await chromium.launchPersistentContext(userDataDir, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
      viewport: { width: 1280, height: 900 },
    });
    page = context.pages()[0] ?? (await context.newPage());
    watch(page);
  });

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
  });

  it('shows the fan chart, thresholds, probabilities and caution for one gauge', async () => {
    const f = server.gauges.get(RIVER.id)!.latest!;
    await page.goto(`${server.url}/view/${RIVER.id}#token=${TOKEN}`);
    await page.locator('#forecast-table tbody tr').first().waitFor();

    // the token left the address bar and never reached the server
    expect(page.url()).toBe(`${server.url}/view/${RIVER.id}`);
    expect(await page.evaluate("sessionStorage.getItem('forecast-page.token')")).toBe(TOKEN);
    expect(server.seen.some((u) => u.includes(TOKEN))).toBe(false);
    expect(await page.title()).toContain(RIVER.name);

    // caution in plain sight, from the JSON
    await expect.poll(() => page.locator('#caution').textContent()).toBe(f.caution);
    expect(await page.locator('#caution').isVisible()).toBe(true);

    // chart: three nested bands, the median, one faint line per corrected member, thresholds labelled
    const svg = page.locator('#flow-svg');
    expect(await svg.getAttribute('role')).toBe('img');
    expect(await page.locator('#flow-title').textContent()).toContain(RIVER.name);
    const bands = await svg.locator('path.band').evaluateAll((ps) => ps.map((p) => ({ band: p.getAttribute('data-band'), d: p.getAttribute('d') ?? '' })));
    expect(bands.map((b) => b.band)).toEqual(['5–95 %', '10–90 %', '25–75 %']);
    for (const b of bands) expect(b.d).toMatch(/^M[\d.,L]+Z$/);
    const median = (await svg.locator('path.median').getAttribute('d')) ?? '';
    expect(median.split('L').length).toBe(f.leadTimes.length);
    expect(await svg.locator('.members.corrected path').count()).toBe(f.ensemble.corrected.length);
    expect(await svg.locator('.members.raw path').count()).toBe(0);
    expect(await svg.locator('.observed circle').count()).toBe(f.recent.observed.filter((v) => v !== null).length);
    const labels = await svg.locator('.threshold-label').allTextContents();
    for (const t of f.thresholds) expect(labels.some((l) => l.includes(t.label) && l.includes(String(t.value)))).toBe(true);
    // Thresholds share one colour and differ by dash pattern: no colour ranks them.
    const lines = await svg.locator('.threshold > line:first-child').evaluateAll((ls) => ls.map((l) => [l.getAttribute('stroke'), l.getAttribute('stroke-dasharray') ?? 'solid']));
    expect(lines).toHaveLength(f.thresholds.length);
    expect(new Set(lines.map(([stroke]) => stroke)).size).toBe(1);
    expect(new Set(lines.map(([, dash]) => dash)).size).toBe(f.thresholds.length);
    const axisText = (await svg.locator('.axis.x text').allTextContents()).filter((t) => t !== 'valid time (UTC)');
    expect(axisText.length).toBeGreaterThanOrEqual(4);
    for (const t of axisText) expect(t).toMatch(/^\d{1,2} (Nov|Dec)$/); // daily steps: day and month labels
    expect(await svg.locator('.axis.y text').allTextContents()).toContain('flow (m³/s)');

    // pointing at the chart shows the numbers of the nearest lead time
    const [px, py] = median.split('L')[2].replace(/^M/, '').split(',').map(Number);
    await svg.hover({ position: { x: px, y: py } });
    const iMed = f.quantiles.probabilities.indexOf(0.5);
    const readout = await svg.locator('.readout text').allTextContents();
    expect(readout[0].replace(/\u00a0/g, ' ')).toContain('3 d');
    expectFlow(readout[1].replace('median ', '').replace(' m³/s', ''), f.quantiles.values[iMed][2]);

    // probability chart: one series per threshold
    expect(await page.locator('#prob-svg .series').count()).toBe(f.thresholds.length);

    // the numbers table matches the JSON
    checkTable(await tableRows(page), f);
    expect(await tableTimes(page)).toEqual(f.validTimes);
    for (const t of f.thresholds) {
      const item = page.locator(`.anytime li[data-threshold="${t.label}"]`);
      expectProb((await item.locator('.p').textContent()) ?? '', t.anyTime);
      expect(await item.evaluate((el) => el.classList.contains('attention'))).toBe(t.attention);
    }

    // run facts
    const facts = (await page.locator('.facts').textContent()) ?? '';
    expect(facts).toContain('30 Nov 2024 00:00 UTC');
    expect(facts).toContain(String(f.seed));
    expect(facts).toContain(f.modelVersion!.label);
    expect(facts).toContain('corrected');

    await page.screenshot({ path: join(OUT, 'page-gauge.png'), fullPage: true });
  });

  it('draws the raw members on request', async () => {
    const f = server.gauges.get(RIVER.id)!.latest!;
    await page.locator('#raw-toggle').check();
    expect(await page.locator('#flow-svg .members.raw path').count()).toBe(f.ensemble.raw.length);
    await page.screenshot({ path: join(OUT, 'page-gauge-raw.png') });
    await page.locator('#raw-toggle').uncheck();
    expect(await page.locator('#flow-svg .members.raw path').count()).toBe(0);
  });

  it('reloads when a forecast event for the shown gauge arrives, and only then', async () => {
    await expect.poll(() => server.openStreams()).toBe(1);
    await expect.poll(() => page.locator('#live').getAttribute('data-state')).toBe('live');
    const before = server.latestReads.get(RIVER.id) ?? 0;

    const next = riverRun('2024-12-01T00:00:00Z', 5151, 3.2);
    server.gauges.get(RIVER.id)!.latest = next;
    server.sendEvent('forecast', { gaugeId: BROOK.id, runId: 'other', issueTime: '2024-12-01T00:00:00Z' });
    server.sendEvent('forecast', { gaugeId: RIVER.id, runId: next.id, issueTime: next.issueTime });

    await expect.poll(() => page.locator('.facts').textContent()).toContain('1 Dec 2024 00:00 UTC');
    checkTable(await tableRows(page), next);
    await new Promise((r) => setTimeout(r, 300));
    expect((server.latestReads.get(RIVER.id) ?? 0) - before).toBe(1);
    await page.screenshot({ path: join(OUT, 'page-gauge-updated.png'), fullPage: true });
  });

  it('reconnects after the event stream drops, with a new ticket, resuming after the last event seen', async () => {
    const opened = server.resumedFrom.length;
    server.dropStreams();
    await expect.poll(() => page.locator('#live').getAttribute('data-state')).not.toBe('live');
    await expect.poll(() => server.openStreams(), { timeout: 10_000 }).toBe(1);
    await expect.poll(() => page.locator('#live').getAttribute('data-state')).toBe('live');
    // the fixture numbers events from 101; two forecast events were sent by the test before
    expect(server.resumedFrom.slice(opened)).toEqual(['102']);
    const streamUrls = server.seen.filter((u) => u.startsWith('/events'));
    expect(streamUrls.every((u) => /^\/events\?ticket=stk_fixture_/.test(u))).toBe(true);
    expect(new Set(streamUrls.map((u) => new URL(u, server.url).searchParams.get('ticket'))).size).toBe(streamUrls.length);

    const next = riverRun('2024-12-02T00:00:00Z', 6262, 2.3);
    server.gauges.get(RIVER.id)!.latest = next;
    server.sendEvent('forecast', { gaugeId: RIVER.id, runId: next.id, issueTime: next.issueTime });
    await expect.poll(() => page.locator('.facts').textContent()).toContain('2 Dec 2024 00:00 UTC');
    checkTable(await tableRows(page), next);
  });

  it('asks for a token when the one given is refused', async () => {
    const other = await context.newPage();
    watch(other);
    await other.goto(`${server.url}/view/${RIVER.id}#token=not-a-valid-token`);
    await other.locator('#token-form').waitFor({ state: 'visible' });
    expect(other.url()).toBe(`${server.url}/view/${RIVER.id}`);
    expect(await other.locator('#token-message').textContent()).toContain('refused');
    expect(await other.locator('#forecast-table').count()).toBe(0);
    expect(await other.locator('#caution').isVisible()).toBe(true); // the caution shows before any data
    await other.screenshot({ path: join(OUT, 'page-token.png') });

    await other.locator('#token-input').fill(TOKEN);
    await other.locator('#token-form button').click();
    await other.locator('#forecast-table tbody tr').first().waitFor();
    expect(await other.locator('#token-form').isVisible()).toBe(false);
    expect(await other.evaluate("sessionStorage.getItem('forecast-page.token')")).toBe(TOKEN);
    await other.close();
  });

  it('shows a degraded run with its reason, and a gauge without a forecast', async () => {
    const f = server.gauges.get(BROOK.id)!.latest!;
    await page.goto(`${server.url}/view/${BROOK.id}`);
    await page.locator('#forecast-table tbody tr').first().waitFor();
    const alert = (await page.locator('.degraded').textContent()) ?? '';
    expect(alert).toContain('Degraded');
    expect(alert).toContain(f.degradedReason!);
    expect(await page.locator('.facts').textContent()).toContain('degraded');
    checkTable(await tableRows(page), f);
    await page.screenshot({ path: join(OUT, 'page-degraded.png'), fullPage: true });

    await page.goto(`${server.url}/view/${FELL.id}`);
    await page.locator('.no-forecast').waitFor();
    expect(await page.locator('#caution').isVisible()).toBe(true);
  });

  it('shows the overview with each gauge and its highest probabilities, and follows events', async () => {
    await page.goto(`${server.url}/`);
    await page.locator('.card').first().waitFor();
    expect(await page.title()).toContain('Gauges');
    expect(await page.locator('.card').count()).toBe(3);

    for (const g of server.gauges.values()) {
      const card = page.locator(`.card[data-gauge="${g.id}"]`);
      expect(await card.locator('h2 a').getAttribute('href')).toBe(`/view/${g.id}`);
      expect(await card.locator('h2').textContent()).toBe(g.name);
      const meta = (await card.locator('.meta').textContent()) ?? '';
      expect(meta).toContain({ ok: 'ok', drifting: 'drifting', 'no-forecast': 'no forecast', 'insufficient-data': 'insufficient data' }[g.status]);
      if (g.latest) expect(meta).toContain(g.latest.status);
      for (const t of g.thresholds) {
        const row = card.locator(`tr[data-threshold="${t.label}"]`);
        const ft = g.latest?.thresholds.find((x) => x.label === t.label);
        if (ft) {
          expectProb((await row.locator('td.max').textContent()) ?? '', Math.max(...ft.exceedance));
          expectProb((await row.locator('td.any').textContent()) ?? '', ft.anyTime);
          expect(await row.evaluate((el) => el.classList.contains('attention'))).toBe(ft.attention);
        } else {
          expect(((await row.locator('td.max').textContent()) ?? '').trim()).toBe('–');
        }
      }
      const anyAttention = g.latest?.thresholds.some((t) => t.attention) ?? false;
      expect(await card.evaluate((el) => el.classList.contains('attention'))).toBe(anyAttention);
    }
    // the fixture must exercise both highlighted and plain thresholds
    const all = [...server.gauges.values()].flatMap((g) => g.latest?.thresholds ?? []);
    expect(all.some((t) => t.attention) && all.some((t) => !t.attention)).toBe(true);
    await page.screenshot({ path: join(OUT, 'page-overview.png'), fullPage: true });

    await expect.poll(() => server.openStreams()).toBe(1);
    await expect.poll(() => page.locator('#live').getAttribute('data-state')).toBe('live');
    server.gauges.get(FELL.id)!.latest = makeForecast({
      gaugeId: FELL.id,
      gaugeName: FELL.name,
      issueTime: '2024-12-02T06:00:00Z',
      seed: 9,
      base: 18,
      peak: 1.8,
      thresholds: [{ label: '2-year flow', value: 30 }],
    });
    server.gauges.get(FELL.id)!.status = 'ok';
    server.sendEvent('forecast', { gaugeId: FELL.id, runId: 'new', issueTime: '2024-12-02T06:00:00Z' });
    await expect.poll(() => page.locator(`.card[data-gauge="${FELL.id}"] .meta`).textContent()).toContain('2 Dec 2024 06:00 UTC');

    await page.locator(`.card[data-gauge="${RIVER.id}"] h2 a`).click();
    await page.locator('#flow-svg path.median').waitFor();
    expect(page.url()).toBe(`${server.url}/view/${RIVER.id}`);
  });

  it('fits a narrow screen', async () => {
    await page.setViewportSize({ width: 390, height: 844 });
    await page.goto(`${server.url}/view/${RIVER.id}`);
    await page.locator('#flow-svg path.median').waitFor();
    const overflow = await page.evaluate<number>('document.documentElement.scrollWidth - document.documentElement.clientWidth');
    expect(overflow).toBeLessThanOrEqual(0);
    await page.screenshot({ path: join(OUT, 'page-gauge-narrow.png'), fullPage: true });
    await page.goto(`${server.url}/`);
    await page.locator('.card').first().waitFor();
    await page.screenshot({ path: join(OUT, 'page-overview-narrow.png'), fullPage: true });
    await page.setViewportSize({ width: 1280, height: 900 });
  });

  it('logged no script errors or blocked resources', () => {
    expect(problems).toEqual([]);
  });
});

describe('page files', () => {
  let server: FixtureServer;
  beforeAll(async () => {
    server = await startFixtureServer(TOKEN, []);
  });
  afterAll(async () => server?.close());

  it('serves the page openly with content types, a short cache time and revalidation', async () => {
    for (const [url, type] of [
      ['/', 'text/html'],
      ['/view/any-gauge', 'text/html'],
      ['/page/app.js', 'text/javascript'],
      ['/page/style.css', 'text/css'],
    ] as const) {
      const res = await server.app.inject({ method: 'GET', url });
      expect(res.statusCode, url).toBe(200);
      expect(res.headers['content-type']).toContain(type);
      expect(res.headers['cache-control']).toBe('public, max-age=60');
      expect(res.headers['content-security-policy']).toContain("script-src 'self'");
      const again = await server.app.inject({ method: 'GET', url, headers: { 'if-none-match': String(res.headers.etag) } });
      expect(again.statusCode, url).toBe(304);
      expect(again.body).toBe('');
    }
    expect((await server.app.inject({ method: 'GET', url: '/' })).body).toContain('<title>');

    // Every module of the page is served as JavaScript, and every module another one imports exists.
    const pageDir = join(import.meta.dirname, '..', '..', 'src', 'api', 'page');
    const modules = readdirSync(pageDir).filter((n) => n.endsWith('.js'));
    expect(modules.length).toBeGreaterThan(1);
    for (const name of modules) {
      const res = await server.app.inject({ method: 'GET', url: `/page/${name}` });
      expect(res.statusCode, name).toBe(200);
      expect(res.headers['content-type'], name).toContain('text/javascript');
      expect(res.headers.etag, name).toBeTruthy();
      for (const [, imported] of readFileSync(join(pageDir, name), 'utf8').matchAll(/from '\.\/([\w-]+\.js)'/g)) {
        expect(modules, `${name} imports ${imported}`).toContain(imported);
      }
    }
    const missing = await server.app.inject({ method: 'GET', url: '/page/nothing.js' });
    expect(missing.statusCode).toBe(404);
    expect(missing.headers['content-type']).toContain('application/problem+json');
  });
});
