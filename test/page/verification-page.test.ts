// Browser test of the verification part of the gauge page: Debian's chromium driven by
// playwright-core against the stand-in service (test/page/fixture-server.ts). The verification
// answer is computed by the real core functions (createWarningVerification, compareForecasts) on
// invented runs of an invented gauge; the checks compare what the page draws with that JSON.
import { existsSync, mkdirSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/services/caution.ts';
import { createPrng } from '../../src/core/prng.ts';
import {
  climatologicalRates,
  compareForecasts,
  createWarningVerification,
  seasonalClimatology,
  type VerificationCase,
  type WarningReport,
  type WarningRun,
} from '../../src/core/verification/index.ts';
import { makeForecast } from './fixture.ts';
import { startFixtureServer, type FixtureServer } from './fixture-server.ts';

const CHROMIUM = '/usr/bin/chromium';
const hasChromium = existsSync(CHROMIUM);
const OUT = join(import.meta.dirname, '..', 'output', 'screens');
const TOKEN = 'read-token-for-the-verification-page-test';
const GAUGE = { id: 'merrow-water-at-fenlock', name: 'Merrow Water at Fenlock' };
const THRESHOLDS = [
  { label: '2-year flow', value: 70 },
  { label: '10-year flow', value: 110 },
];
const DAY = 86_400_000;

/** Invented daily runs: log-flow AR(1); raw members 25 % high, corrected unbiased, 200 draws of the true predictive. */
function verificationAnswer() {
  const g = createPrng(21);
  const H = 7;
  const nHist = 3 * 365;
  const nIssues = 300;
  const n = nHist + nIssues + H + 1;
  const t0 = Date.UTC(2021, 0, 1);
  const times = Float64Array.from({ length: n }, (_, i) => t0 + i * DAY);
  const z = new Float64Array(n);
  for (let i = 1; i < n; i++) z[i] = 0.85 * z[i - 1] + 0.35 * g.normal();
  const flow = Float64Array.from(z, (x, i) => 45 * Math.exp(x + 0.4 * Math.sin((2 * Math.PI * i) / 365)));
  const w = createWarningVerification({
    sources: ['raw', 'corrected', 'stochastic'],
    thresholds: THRESHOLDS,
    attentionLevel: 0.3,
    climatology: seasonalClimatology(times.subarray(0, nHist), flow.subarray(0, nHist), times[nHist], 15),
    climatologicalRates: climatologicalRates(flow.subarray(0, nHist), THRESHOLDS.map((t) => t.value), H),
    stepMs: DAY,
    replicates: 200,
    diagramResamples: 100,
  });
  const cases: VerificationCase[] = [];
  for (let s = 0; s < nIssues; s++) {
    const i = nHist + s;
    const draw = (count: number, scale: number) => {
      const out = new Float64Array(count * H);
      for (let j = 0; j < count; j++) {
        let e = z[i];
        for (let k = 0; k < H; k++) {
          e = 0.85 * e + 0.35 * g.normal();
          out[j * H + k] = scale * 45 * Math.exp(e + 0.4 * Math.sin((2 * Math.PI * (i + k + 1)) / 365));
        }
      }
      return out;
    };
    const raw = draw(10, 1.25);
    const cor = draw(10, 1);
    const sto = draw(200, 1);
    const run: WarningRun = {
      issueMs: times[i],
      nLeads: H,
      validMs: Float64Array.from({ length: H }, (_, k) => times[i + k + 1]),
      observed: Float64Array.from({ length: H }, (_, k) => flow[i + k + 1]),
      persistence: flow[i],
      sources: [
        { values: raw, count: 10, trajectories: true },
        { values: cor, count: 10, trajectories: true },
        { values: sto, count: 200, trajectories: true },
      ],
    };
    w.addRun(run);
    for (let k = 0; k < H; k++) {
      const col = (v: Float64Array, m: number) => Float64Array.from({ length: m }, (_, j) => v[j * H + k]);
      cases.push({ lead: k, observation: flow[i + k + 1], raw: col(raw, 10), corrected: col(cor, 10), stochastic: col(sto, 200) });
    }
  }
  return { gaugeId: GAUGE.id, caution: CAUTION, runs: { total: nIssues, verified: nIssues }, comparison: compareForecasts(cases, { thresholds: THRESHOLDS.map((t) => t.value) }), warningScores: w.result() };
}

let server: FixtureServer;
let context: BrowserContext;
let page: Page;
let userDataDir: string;
let answer: ReturnType<typeof verificationAnswer>;
const problems: string[] = [];

describe.skipIf(!hasChromium)('verification on the gauge page in chromium', () => {
  beforeAll(async () => {
    mkdirSync(OUT, { recursive: true });
    answer = verificationAnswer();
    server = await startFixtureServer(TOKEN, [
      {
        ...GAUGE,
        status: 'ok',
        thresholds: THRESHOLDS,
        latest: makeForecast({ gaugeId: GAUGE.id, gaugeName: GAUGE.name, issueTime: '2024-11-30T00:00:00Z', seed: 5, base: 40, peak: 1.8, thresholds: THRESHOLDS }),
        verification: answer,
      },
    ]);
    userDataDir = mkdtempSync(join(tmpdir(), 'verification-page-chromium-'));
    context = await chromium.launchPersistentContext(userDataDir, {
      executablePath: CHROMIUM,
      headless: true,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-quic', '--no-first-run', '--disable-component-update', '--disable-sync'],
      viewport: { width: 1200, height: 900 },
    });
    page = await context.newPage();
    page.on('pageerror', (err) => problems.push(`page error: ${err.message}`));
    page.on('console', (msg) => {
      if (msg.type() === 'error') problems.push(`console: ${msg.text()}`);
    });
  }, 120_000);

  afterAll(async () => {
    await context?.close();
    await server?.close();
    if (userDataDir) rmSync(userDataDir, { recursive: true, force: true });
  });

  it('draws the reliability diagram, ROC curves, CRPS and skill per lead with bands, and the PIT histogram from the answer', async () => {
    await page.goto(`${server.url}/view/${GAUGE.id}#token=${TOKEN}`);
    await page.locator('#verification-load').click();
    await expect.poll(() => page.locator('#reliability-svg').count(), { timeout: 15_000 }).toBe(1);
    expect(server.seen.some((u) => u.startsWith(`/gauges/${GAUGE.id}/verification`))).toBe(true);
    const w = answer.warningScores as WarningReport;

    // Summary and caution as given.
    const summary = await page.locator('#verification-summary').textContent();
    expect(summary).toContain(`${w.runs} runs, ${w.cases} verified lead times`);
    expect(await page.locator('.caution-inline').textContent()).toBe(CAUTION);

    // Default event: the first threshold, any time in the horizon.
    const ev = w.events.find((e) => e.threshold === THRESHOLDS[0].label && e.event === 'any-time')!;
    const st = ev.sources.stochastic!;
    const filled = st.diagram.filter((b) => b.count > 0 && b.meanForecast !== null && b.observedFrequency !== null);
    const counts = await page.$$eval('#reliability-svg .reliability-points circle', (cs) => cs.map((c) => Number(c.getAttribute('data-count'))));
    expect(counts).toEqual(filled.map((b) => b.count));
    expect(await page.locator('#reliability-svg .consistency line').count()).toBe(filled.filter((b) => b.consistencyLow !== null).length);
    expect(await page.locator('#roc-svg path.roc-line').count()).toBe(3);

    // The attention-flag table shows the counts of the JSON, per forecast.
    const rows = await page.$$eval('#warning-table tbody tr', (trs) => trs.map((r) => [r.getAttribute('data-source'), ...[...r.children].map((c) => c.textContent ?? '')]));
    expect(rows.map((r) => r[0])).toEqual(['stochastic', 'corrected', 'raw']);
    for (const r of rows) {
      const e = ev.sources[r[0] as 'raw']!;
      expect(r.slice(2, 7).map(Number)).toEqual([e.n, e.events, e.attention.hits, e.attention.falseAlarms, e.attention.misses]);
      const hit = e.attention.hitRate;
      expect(r[7]).toBe(`${hit.value!.toFixed(3)} (${hit.low!.toFixed(3)} – ${hit.high!.toFixed(3)})`);
    }

    // Per-lead pictures: one line and one interval band per series.
    expect(await page.locator('#crps-lead-svg path.score-line').count()).toBe(3);
    expect(await page.locator('#crps-lead-svg path.interval-band').count()).toBe(3);
    expect(await page.locator('#skill-lead-svg path.interval-band').count()).toBe(2);
    const crpsPath = (await page.locator('#crps-lead-svg .series-stochastic path.score-line').getAttribute('d')) ?? '';
    expect(crpsPath.split('L')).toHaveLength(w.skill.stochastic!.byLead.length);

    // PIT histogram: the comparison's counts.
    const pit = await page.$$eval('#pit-svg .pit-bars rect', (rs) => rs.map((r) => Number(r.getAttribute('data-count'))));
    expect(pit).toEqual(answer.comparison.stochastic!.pitHistogram.counts);

    // Choosing the other threshold and event redraws from that event's numbers.
    await page.selectOption('#verification-threshold', '1');
    await page.selectOption('#verification-event', 'lead-time');
    const ev2 = w.events.find((e) => e.threshold === THRESHOLDS[1].label && e.event === 'lead-time')!;
    const counts2 = await page.$$eval('#reliability-svg .reliability-points circle', (cs) => cs.map((c) => Number(c.getAttribute('data-count'))));
    expect(counts2).toEqual(ev2.sources.stochastic!.diagram.filter((b) => b.count > 0 && b.observedFrequency !== null).map((b) => b.count));

    // No warm colours in the pictures: every stroke and fill of the verification is a cool hue (or grey).
    const colours = await page.$$eval('#verification svg *', (els) => els.flatMap((e) => [e.getAttribute('stroke'), e.getAttribute('fill')]).filter((c): c is string => !!c && c.startsWith('#')));
    for (const c of new Set(colours)) {
      const [r, g, b] = [1, 3, 5].map((i) => parseInt(c.slice(i, i + 2), 16));
      expect(b, `colour ${c}`).toBeGreaterThanOrEqual(r);
      expect(b + 10, `colour ${c}`).toBeGreaterThanOrEqual(g);
    }
    await page.locator('#verification').screenshot({ path: join(OUT, 'gauge-verification.png') });
    expect(problems).toEqual([]);
  });
});
