import type { FastifyInstance, FastifyReply } from 'fastify';
import { z } from 'zod';
import {
  adviseStochasticStage,
  createComparison,
  midpointProbs,
  type ComparisonReport,
  type SourceReport,
  type StochasticAdvice,
} from '../core/verification/index.ts';
import { scheduleGaugeStatusRefresh, settleGaugeStatusRefreshes } from '../jobs/drift-refresh.ts';
import { withLeadTimes } from '../jobs/hindcast-job.ts';
import { readObservations } from '../store/archive-repo.ts';
import type { Db } from '../store/db.ts';
import { getGaugeStatus } from '../store/gauge-status-repo.ts';
import { listGauges, type Gauge } from '../store/gauges-repo.ts';
import { readRunsForVerification } from '../store/verification-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { chooseFormat, FormatOnly, type Format } from './formats.ts';
import { Rfc3339 } from './schemas.ts';
import { isoUtc } from './series-input.ts';
import { parseWith } from './validate.ts';

const VerificationQuery = z
  .strictObject({
    /** Issue-time window [from, to). */
    from: Rfc3339.optional(),
    to: Rfc3339.optional(),
    /** Lead times kept, in steps after issue time (1 = first). */
    minLead: z.coerce.number().int().min(1).max(100_000).optional(),
    maxLead: z.coerce.number().int().min(1).max(100_000).optional(),
    /** Only runs from this forecast source. */
    source: z.string().min(1).max(64).optional(),
    format: FormatOnly,
  })
  .refine((q) => !(q.from && q.to) || Date.parse(q.from) < Date.parse(q.to), { message: 'from must be before to', path: ['to'] })
  .refine((q) => q.minLead === undefined || q.maxLead === undefined || q.minLead <= q.maxLead, { message: 'minLead must not exceed maxLead', path: ['maxLead'] });

// ---- one row per score, columns raw / corrected / stochastic (CSV and text) ----

export interface ScoreRow {
  score: string;
  unit: string;
  values: (number | string | null)[];
}

const pct = (l: number) => `${Math.round(l * 1000) / 10} %`;

/** The main scores side by side, in the order an operator reads them. */
export function scoreRows(report: ComparisonReport): ScoreRow[] {
  const sources: (SourceReport | null)[] = [report.raw, report.corrected, report.stochastic];
  const row = (score: string, unit: string, get: (s: SourceReport) => number | string | null | undefined): ScoreRow => ({
    score,
    unit,
    values: sources.map((s) => (s && s.n > 0 ? (get(s) ?? null) : null)),
  });
  const rows: ScoreRow[] = [
    row('cases', '', (s) => s.n),
    row('members or values per case', '', (s) => s.members.max),
    row('MAE of the median', 'm3/s', (s) => s.median.mae),
    row('RMSE of the median', 'm3/s', (s) => s.median.rmse),
    row('NSE of the median', '', (s) => s.median.nse),
    row('KGE of the median', '', (s) => s.median.kge),
    row('MAE of the mean', 'm3/s', (s) => s.mean.mae),
    row('RMSE of the mean', 'm3/s', (s) => s.mean.rmse),
    row('NSE of the mean', '', (s) => s.mean.nse),
    row('KGE of the mean', '', (s) => s.mean.kge),
    row('bias of the mean', 'm3/s', (s) => s.mean.bias),
    row('CRPS', 'm3/s', (s) => s.crps.crps),
    row('fair CRPS', 'm3/s', (s) => s.crps.fairCrps),
    row('CRPS skill vs raw', '', (s) => s.crps.skillVsRaw),
    row('fair CRPS skill vs raw', '', (s) => s.crps.fairSkillVsRaw),
    row('CRPS reliability (Hersbach)', 'm3/s', (s) => s.crps.hersbach.reliability),
    row('CRPS potential (Hersbach)', 'm3/s', (s) => s.crps.hersbach.potential),
    row('alpha index', '', (s) => s.alphaIndex),
    row('PIT mean', '', (s) => s.pit.mean),
    row('PIT variance ratio', '', (s) => s.pit.varianceRatio),
  ];
  for (const level of report.settings.levels) {
    const at = (s: SourceReport) => s.intervals.find((i) => i.level === level);
    rows.push(row(`coverage of the ${pct(level)} band`, '', (s) => at(s)?.coverage));
    rows.push(row(`PIT coverage ${pct(level)}`, '', (s) => at(s)?.pitCoverage));
    rows.push(row(`width of the ${pct(level)} band`, 'm3/s', (s) => at(s)?.meanWidth));
  }
  report.settings.thresholds.forEach((thr, t) => {
    rows.push(row(`Brier score, flow > ${thr}`, '', (s) => s.brier[t]?.brier));
    rows.push(row(`Brier skill, flow > ${thr}`, '', (s) => s.brier[t]?.skill));
  });
  rows.push(row('spread class', '', (s) => s.spread.class));
  return rows;
}

const csvField = (v: string) => (/[",\n]/.test(v) ? `"${v.replace(/"/g, '""')}"` : v);

export function scoresCsv(report: ComparisonReport, comments: string[]): string {
  const lines = comments.map((c) => `# ${c.replace(/\n/g, ' ')}`);
  lines.push('score,unit,raw,corrected,stochastic');
  for (const r of scoreRows(report)) lines.push([r.score, r.unit, ...r.values.map((v) => (v === null ? '' : String(v)))].map(csvField).join(','));
  return `${lines.join('\n')}\n`;
}

const fmt = (v: number | string | null): string => {
  if (v === null) return '–';
  if (typeof v === 'string') return v;
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a >= 1000 ? v.toFixed(0) : a >= 100 ? v.toFixed(1) : a >= 1 ? v.toFixed(3) : v.toFixed(4);
};

/** A fixed-width table: first column left-aligned, the others right-aligned. */
export function textTable(header: string[], rows: string[][]): string[] {
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (cells: string[]) => cells.map((c, i) => (i === 0 ? c.padEnd(widths[i]) : c.padStart(widths[i]))).join('  ').trimEnd();
  return [line(header), line(widths.map((w) => '-'.repeat(w))), ...rows.map(line)];
}

export function scoresText(title: string[], report: ComparisonReport, advice: StochasticAdvice, notes: string[]): string {
  const table = textTable(
    ['score', 'raw', 'corrected', 'stochastic'],
    scoreRows(report).map((r) => [`${r.score}${r.unit ? ` (${r.unit})` : ''}`, ...r.values.map(fmt)]),
  );
  return [
    ...title,
    '',
    ...table,
    '',
    `Stochastic stage: ${advice.recommendation}`,
    ...advice.reasons.map((r) => `  - ${r}`),
    ...(notes.length ? ['', ...notes.map((n) => `Note: ${n}`)] : []),
    '',
  ].join('\n');
}

// ---- verification of stored runs ----

const PAGE = 500;

export const DEGRADED_HANDLING =
  'Degraded runs (served without the residual model: the stochastic stage ran on the raw members with the raw-error archive) have no corrected ensemble. They are left out of all three columns, so raw, corrected and stochastic are scored on exactly the same cases, and are counted under degraded.';

export const STOCHASTIC_FROM = 'The stochastic stage is scored from the quantiles stored with each run at the 100 midpoint levels (i − 0.5)/100, as a 100-member ensemble.';

export interface StoredVerification {
  gaugeId: string;
  unit: 'm3/s';
  window: { from: string | null; to: string | null };
  leadRange: { min: number | null; max: number | null };
  source: string | null;
  runs: { total: number; verified: number; corrected: number; degraded: number; sources: Record<string, number>; modelVersions: { id: string | null; runs: number }[] };
  degraded: { runs: number; cases: number; handling: string };
  stochasticFrom: string;
  thresholds: { label: string; value: number }[];
  comparison: ComparisonReport;
  advice: StochasticAdvice;
  notes: string[];
}

/**
 * Matches every stored run's lead times with the observations at their valid times and compares
 * raw, corrected and stochastic side by side (core compareForecasts, streamed page by page).
 */
export async function verifyStoredRuns(
  db: Db,
  gauge: Gauge,
  q: { fromMs?: number; toMs?: number; minLead?: number; maxLead?: number; source?: string },
): Promise<StoredVerification> {
  const comparison = createComparison({
    seed: 1,
    thresholds: gauge.thresholds.map((t) => t.value),
    leadRange: q.minLead !== undefined || q.maxLead !== undefined ? { min: q.minLead !== undefined ? q.minLead - 1 : undefined, max: q.maxLead !== undefined ? q.maxLead - 1 : undefined } : null,
    includeStochastic: true,
  });
  const minK = (q.minLead ?? 1) - 1;
  const maxK = (q.maxLead ?? Infinity) - 1;
  const runs = { total: 0, verified: 0, corrected: 0, degraded: 0, sources: {} as Record<string, number>, modelVersions: new Map<string | null, number>() };
  let degradedCases = 0;
  const grids = new Map<number, Float64Array>();
  let rawBuf = new Float64Array(64);
  let corBuf = new Float64Array(64);
  let after: { issueMs: number; id: string } | undefined;
  for (;;) {
    const page = await readRunsForVerification(db, { gaugeId: gauge.id, fromMs: q.fromMs, toMs: q.toMs, source: q.source, after, limit: PAGE });
    if (!page.length) break;
    let lo = Infinity;
    let hi = -Infinity;
    for (const r of page) {
      if (!r.validTimes.length) continue;
      lo = Math.min(lo, Date.parse(r.validTimes[0]));
      hi = Math.max(hi, Date.parse(r.validTimes[r.validTimes.length - 1]));
    }
    const obs = new Map<number, number>();
    if (lo <= hi) for (const o of await readObservations(db, gauge.id, { fromMs: lo, toMs: hi + 1 })) if (o.value !== null) obs.set(o.t, o.value);
    for (const r of page) {
      runs.total++;
      runs[r.status]++;
      runs.sources[r.source] = (runs.sources[r.source] ?? 0) + 1;
      runs.modelVersions.set(r.modelVersionId, (runs.modelVersions.get(r.modelVersionId) ?? 0) + 1);
      const M = r.raw.length;
      if (rawBuf.length < M) {
        rawBuf = new Float64Array(M);
        corBuf = new Float64Array(M);
      }
      let verified = false;
      r.validTimes.forEach((vt, k) => {
        const y = obs.get(Date.parse(vt));
        if (y === undefined) return;
        verified = true;
        if (r.status === 'degraded' || !r.corrected) {
          if (k >= minK && k <= maxK) degradedCases++;
          return;
        }
        const raw = rawBuf.subarray(0, M);
        const cor = corBuf.subarray(0, r.corrected.length);
        for (let m = 0; m < M; m++) raw[m] = r.raw[m].values[k];
        for (let m = 0; m < r.corrected.length; m++) cor[m] = r.corrected[m].values[k];
        const values = r.percentiles[k] ?? [];
        let probs = grids.get(values.length);
        if (!probs && values.length) grids.set(values.length, (probs = midpointProbs(values.length)));
        comparison.add({ lead: k, observation: y, raw, corrected: cor, stochasticQuantiles: probs ? { probs, values } : null, validTime: vt });
      });
      if (verified) runs.verified++;
    }
    const last = page[page.length - 1];
    after = { issueMs: last.issueMs, id: last.id };
    if (page.length < PAGE) break;
  }
  const report = withLeadTimes(comparison.result(), gauge.stepSeconds);
  const advice = adviseStochasticStage(report);
  const notes: string[] = [];
  if (runs.degraded) notes.push(`${runs.degraded} degraded runs (${degradedCases} observed lead times) are left out of the comparison; see degraded.handling.`);
  const versions = [...runs.modelVersions.keys()].filter((v) => v !== null);
  if (versions.length > 1) notes.push(`Runs of ${versions.length} model versions are pooled (${versions.join(', ')}); narrow the window to judge one version.`);
  if (runs.total === 0) notes.push('No stored run in the window.');
  else if (report.cases.used === 0) notes.push('No lead time of these runs has an observation yet.');
  return {
    gaugeId: gauge.id,
    unit: 'm3/s',
    window: { from: q.fromMs !== undefined ? isoUtc(q.fromMs) : null, to: q.toMs !== undefined ? isoUtc(q.toMs) : null },
    leadRange: { min: q.minLead ?? null, max: q.maxLead ?? null },
    source: q.source ?? null,
    runs: { ...runs, modelVersions: [...runs.modelVersions].map(([id, n]) => ({ id, runs: n })) },
    degraded: { runs: runs.degraded, cases: degradedCases, handling: DEGRADED_HANDLING },
    stochasticFrom: STOCHASTIC_FROM,
    thresholds: gauge.thresholds,
    comparison: report,
    advice,
    notes,
  };
}

function send(reply: FastifyReply, format: Format, filename: string, json: unknown, csv: () => string, text: () => string): unknown {
  reply.header('vary', 'accept');
  if (format === 'csv') {
    reply.type('text/csv; charset=utf-8').header('content-disposition', `inline; filename="${filename}.csv"`);
    return csv();
  }
  if (format === 'text') {
    reply.type('text/plain; charset=utf-8');
    return text();
  }
  return json;
}

export { send as sendReport };

/** First drift refresh after start, then every 10 minutes (observations also trigger one). */
const FIRST_REFRESH_MS = 30_000;
const REFRESH_EVERY_MS = 10 * 60_000;

export async function verificationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/gauges/:id/verification',
      summary: 'Stored runs against the observations posted since: raw, corrected and stochastic side by side, with PIT, reliability and coverage data and the stochastic-stage advice (JSON, CSV or text)',
      tag: 'verification',
      role: 'read',
      params: GaugeParams,
      query: VerificationQuery,
      responseTypes: ['application/json', 'text/csv', 'text/plain'],
    },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = parseWith(VerificationQuery, req.query, 'query');
      const v = await verifyStoredRuns(db, gauge, {
        fromMs: q.from ? Date.parse(q.from) : undefined,
        toMs: q.to ? Date.parse(q.to) : undefined,
        minLead: q.minLead,
        maxLead: q.maxLead,
        source: q.source,
      });
      const drift = await getGaugeStatus(db, gauge.id);
      const header = [
        `${gauge.name} (${gauge.id}) — verification of stored runs, issued ${v.window.from ?? 'any time'} to ${v.window.to ?? 'now'}, lead times ${v.leadRange.min ?? 1}–${v.leadRange.max ?? 'all'} steps; flows in m3/s`,
        `${v.runs.total} runs (${v.runs.verified} with observations), ${v.comparison.cases.used} verified cases; ${v.degraded.runs} degraded runs left out (${v.degraded.cases} cases)`,
      ];
      return send(
        reply,
        chooseFormat(req, q.format),
        `${gauge.id}-verification`,
        { ...v, drift },
        () => scoresCsv(v.comparison, [...header, `advice: ${v.advice.recommendation}`, v.stochasticFrom]),
        () => scoresText(header, v.comparison, v.advice, [v.stochasticFrom, ...v.notes]),
      );
    },
  );

  let timer: NodeJS.Timeout | null = null;
  let closed = false;
  let running: Promise<void> = Promise.resolve();
  const refreshAll = async () => {
    for (const g of await listGauges(db)) scheduleGaugeStatusRefresh(db, g.id, app.log);
    await settleGaugeStatusRefreshes(db);
  };
  const loop = (delay: number) => {
    timer = setTimeout(() => {
      running = refreshAll()
        .catch((err: Error) => app.log.warn({ err: err.message }, 'drift status refresh failed'))
        .finally(() => {
          if (!closed) loop(REFRESH_EVERY_MS);
        });
    }, delay);
    timer.unref();
  };
  app.addHook('onReady', async () => loop(FIRST_REFRESH_MS));
  app.addHook('onClose', async () => {
    closed = true;
    if (timer) clearTimeout(timer);
    await running;
    await settleGaugeStatusRefreshes(db);
  });
}
