import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import type { ComparisonReport, SizeStudyResult, StochasticAdvice, WarningReport } from '../core/verification/index.ts';
import { hindcastIssues, requestHindcast, type HindcastIssue, type PerIssueInfo } from '../services/hindcast.ts';
import { csvCell } from './csv.ts';
import { HindcastJobParams } from '../services/hindcast-params.ts';
import { getJob, listJobs, type Job } from '../store/jobs-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { conflict, notFound } from '../services/problem.ts';
import { JobAnswer, Rfc3339 } from './schemas.ts';
import { chooseFormat, FormatOnly, sendCaution } from './formats.ts';
const HindcastSummary = z.object({
  id: z.string(),
  status: z.enum(['queued', 'running', 'succeeded', 'failed', 'cancelled']),
  stage: z.string(),
  percent: z.number(),
  mode: z.string(),
  purpose: z.string().optional(),
  modelVersion: z.string().nullable().optional(),
  from: z.string().nullable().optional(),
  to: z.string().nullable().optional(),
  createdAt: z.string(),
  finishedAt: z.string().nullable(),
  error: z.string().nullable(),
  href: z.string(),
});

import { CAUTION } from '../services/caution.ts';
import { scoresCsv, scoresText, sendReport, sizeStudyText, warningsText, type ReportNote } from './report-formats.ts';
import { warningRows } from './warning-tables.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

const SourceEnum = z.enum(['raw', 'corrected', 'stochastic']);

const HindcastBody = z
  .strictObject({
    /** simulation: pseudo-forecasts from the continuous member simulations; reforecast: the stored past runs. */
    mode: z.enum(['simulation', 'reforecast']).default('simulation'),
    /** Model version to run (default: the active one). */
    version: z.string().regex(/^\d{1,18}$/, 'must be a version number').optional(),
    /** Issue-time window [from, to); default: the version's validation period. */
    from: Rfc3339.optional(),
    to: Rfc3339.optional(),
    /** Lead times per issue, in steps (default 10 in simulation mode, the longest stored in reforecast mode). */
    horizon: z.number().int().min(1).max(2000).optional(),
    /** Simulation mode: one issue every n steps (default every step). */
    everySteps: z.number().int().min(1).max(100_000).default(1),
    trajectories: z.number().int().min(10).default(1000),
    seed: z.number().int().min(0).max(2 ** 31 - 1).default(1),
    seasonalWindowDays: z.number().int().min(0).max(183).nullable().default(60),
    /**
     * Store this hindcast's stochastic-stage coverage and CRPS as the model version's drift-watch
     * level (refused when the period overlaps the calibration period). Best from reforecasts of a
     * period the model and its archives have not seen.
     */
    setDriftLevel: z.boolean().default(false),
    minLead: z.number().int().min(1).optional(),
    maxLead: z.number().int().min(1).optional(),
    sizeStudy: z
      .strictObject({
        sources: z.array(SourceEnum).max(3).default(['corrected', 'stochastic']),
        /** Candidate sizes; each forecast keeps those up to its own count; the member count is added. */
        sizes: z.array(z.number().int().min(1).max(100_000)).min(1).max(20).default([5, 10, 25, 50, 100]),
        repeats: z.number().int().min(1).max(200).default(20),
        /** Share of cases studied (default: about 20 000 cases). */
        caseFraction: z.number().gt(0).max(1).optional(),
      })
      .default({ sources: ['corrected', 'stochastic'], sizes: [5, 10, 25, 50, 100], repeats: 20 }),
  })
  .refine((b) => !(b.from && b.to) || rfc3339Ms(b.from) < rfc3339Ms(b.to), { message: 'from must be before to', path: ['to'] })
  .refine((b) => b.minLead === undefined || b.maxLead === undefined || b.minLead <= b.maxLead, { message: 'minLead must not exceed maxLead', path: ['maxLead'] });

const HindcastParams = z.object({ id: GaugeParams.shape.id, jobId: z.string().regex(/^\d{1,18}$/, 'must be a job id') });
const HindcastQuery = z.strictObject({ format: FormatOnly });
const IssuesQuery = z
  .strictObject({ format: z.enum(['json', 'csv']).optional(), from: Rfc3339.optional(), to: Rfc3339.optional() })
  .refine((q) => !(q.from && q.to) || rfc3339Ms(q.from) < rfc3339Ms(q.to), { message: 'from must be before to', path: ['to'] });

/** What a finished hindcast job stores as its result (see src/services/hindcast.ts). */
interface HindcastResult {
  gaugeId: string;
  mode: string;
  modelVersion: { id: string; label: string };
  period: { from: string; to: string };
  issues: { first: string | null; last: string | null; used: number };
  horizon: number;
  members: string[];
  trajectories: number;
  warnings: string[];
  cases: { verified: number };
  comparison: ComparisonReport;
  sizeStudy: SizeStudyResult[] | null;
  advice: StochasticAdvice;
  /** Absent on hindcasts stored before warnings were scored. */
  warningScores?: WarningReport | null;
  caution?: string;
  thresholds: { label: string; value: number }[];
  /** Absent on hindcasts stored before each issue's output was kept. */
  perIssue?: PerIssueInfo;
}

/** The per-issue download as CSV: one row per issue and lead time, the caution in every row. */
function issuesCsv(r: HindcastResult, perIssue: PerIssueInfo, issues: HindcastIssue[]): string {
  const q = (p: number) => `q${String(Math.round(p * 1000) / 10).replace('.', '_')} (m3/s)`;
  const header = [
    'issue_time',
    'lead_time',
    'valid_time',
    'observed (m3/s)',
    'raw_mean (m3/s)',
    'corrected_mean (m3/s)',
    ...perIssue.probabilities.map(q),
    ...r.thresholds.map((t) => `p_exceed ${t.label} (${t.value} m3/s)`),
    ...r.thresholds.map((t) => `p_exceed_any_time ${t.label} (${t.value} m3/s)`),
    'caution',
  ];
  const lines = [header.map(csvCell).join(',')];
  for (const issue of issues) {
    for (const l of issue.leads) {
      lines.push([issue.issueTime, l.leadTime, l.validTime, l.observed, l.rawMean, l.correctedMean, ...l.quantiles, ...l.exceedance, ...issue.anyTime, CAUTION].map(csvCell).join(','));
    }
  }
  return `${lines.join('\n')}\n`;
}

const href = (gaugeId: string, jobId: string) => `/gauges/${gaugeId}/hindcasts/${jobId}`;

function summary(job: Job) {
  const p = HindcastJobParams.parse(job.params);
  return {
    id: job.id,
    status: job.status,
    stage: job.stage,
    percent: job.percent,
    mode: p.mode,
    purpose: p.purpose,
    modelVersion: p.versionId,
    from: p.from,
    to: p.to,
    createdAt: job.createdAt,
    finishedAt: job.finishedAt,
    error: job.error,
    href: href(job.gaugeId!, job.id),
  };
}

export async function hindcastRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db, config } = services;

  addRoute(
    app,
    services,
    {
      method: 'POST',
      url: '/gauges/:id/hindcasts',
      summary: 'Start a hindcast job: the whole correction pipeline over a stored period (simulation or reforecast mode), compared with the same scores, with an ensemble-size study and the stochastic-stage advice',
      tag: 'verification',
      role: 'admin',
      params: GaugeParams,
      body: HindcastBody,
      bodyOptional: true,
      response: JobAnswer.extend({ href: z.string() }),
      status: 202,
    },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const body = req.body;
      const job = await requestHindcast(db, gauge, body, { maxTrajectories: config.MAX_TRAJECTORIES, attentionLevel: config.ATTENTION_LEVEL }, req.principal?.tokenId ?? null);
      reply.code(202).header('location', href(gauge.id, job.id));
      return { ...job, href: href(gauge.id, job.id) };
    },
  );

  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/hindcasts', summary: "The gauge's hindcast jobs, newest first", tag: 'verification', role: 'read', params: GaugeParams, response: z.object({ gaugeId: z.string(), hindcasts: z.array(HindcastSummary) }) },
    async (req) => {
      const gauge = await requireGauge(db, req.params);
      const jobs = (await listJobs(db, gauge.id, null, 200)).filter((j) => j.kind === 'hindcast');
      return { gaugeId: gauge.id, hindcasts: jobs.map(summary) };
    },
  );

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/gauges/:id/hindcasts/:jobId',
      summary: 'One hindcast: progress while it runs; when done, the side-by-side comparison, the ensemble-size study and the advice with its evidence (JSON; CSV or text of the main scores)',
      tag: 'verification',
      role: 'read',
      params: HindcastParams,
      query: HindcastQuery,
      response: HindcastSummary.extend({ params: z.unknown(), startedAt: z.string().nullable(), result: z.looseObject({}).nullable().describe('when succeeded: the comparison, size study, advice, warnings and scores (see the README)') }),
      responseTypes: ['application/json', 'text/csv', 'text/plain'],
    },
    async (req, reply) => {
      const { id, jobId } = req.params;
      const { format } = req.query;
      await requireGauge(db, { id });
      const job = await getJob(db, jobId);
      if (!job || job.kind !== 'hindcast' || job.gaugeId !== id) throw notFound(`gauge ${id} has no hindcast ${jobId}`);
      const chosen = chooseFormat(req, format);
      const body = { ...summary(job), params: job.params, startedAt: job.startedAt, result: job.result };
      sendCaution(reply);
      if (chosen === 'json') return body;
      if (job.status !== 'succeeded' || !job.result) throw conflict(`hindcast ${jobId} is ${job.status}${job.status === 'running' ? ` (${job.stage}, ${Math.round(job.percent)} %)` : ''}; its scores are available as JSON status until it succeeds`);
      const r = job.result as HindcastResult;
      const header = [
        `${r.gaugeId} — hindcast ${jobId} (${r.mode} mode), model version ${r.modelVersion.id} (${r.modelVersion.label}); flows in m3/s`,
        `issues ${r.issues.first} – ${r.issues.last} (${r.issues.used}), ${r.horizon} lead times, ${r.members.length} members, ${r.trajectories} trajectories; ${r.cases.verified} verified cases`,
      ];
      return sendReport(
        reply,
        chosen,
        `${r.gaugeId}-hindcast-${jobId}`,
        body,
        () => scoresCsv(r.comparison, [...header.map((h): ReportNote => ['about', h]), ['advice', r.advice.recommendation], ...r.warnings.map((w): ReportNote => ['warning', w]), ['caution', CAUTION]], r.warningScores ? warningRows(r.warningScores) : []),
        () => `${scoresText(header, r.comparison, r.advice, r.warnings)}${sizeStudyText(r.sizeStudy).join('\n')}\n\n${warningsText(r.warningScores ?? null)}\n\n${CAUTION}\n`,
      );
    },
  );

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/gauges/:id/hindcasts/:jobId/issues',
      summary: "A finished hindcast's output issue by issue (JSON, or CSV with one row per issue and lead time): observed flow, raw and corrected ensemble means, the stochastic stage's quantiles and exceedance probabilities; from/to choose issue times",
      tag: 'verification',
      role: 'read',
      params: HindcastParams,
      query: IssuesQuery,
      response: z.object({ gaugeId: z.string(), hindcast: z.string(), unit: z.literal('m3/s'), caution: z.string(), probabilities: z.array(z.number()), thresholds: z.array(z.looseObject({ label: z.string(), value: z.number() })), issues: z.array(z.looseObject({})).describe('per issue: observed flow, raw and corrected means, quantiles and exceedance per lead') }),
      responseTypes: ['application/json', 'text/csv'],
    },
    async (req, reply) => {
      const { id, jobId } = req.params;
      const gauge = await requireGauge(db, { id });
      const job = await getJob(db, jobId);
      if (!job || job.kind !== 'hindcast' || job.gaugeId !== id) throw notFound(`gauge ${id} has no hindcast ${jobId}`);
      if (job.status !== 'succeeded' || !job.result) throw conflict(`hindcast ${jobId} is ${job.status}; its issues can be read once it has succeeded`);
      const r = job.result as HindcastResult;
      if (!r.perIssue) throw notFound(`hindcast ${jobId} was stored before each issue's output was kept; run it again to read it issue by issue`);
      const q = req.query;
      const issues = await hindcastIssues(db, jobId, { horizon: r.horizon, perIssue: r.perIssue, thresholds: r.thresholds }, gauge.stepSeconds, q.from ? rfc3339Ms(q.from) : undefined, q.to ? rfc3339Ms(q.to) : undefined);
      sendCaution(reply);
      reply.header('vary', 'accept');
      if (chooseFormat(req, q.format) === 'csv') {
        reply.type('text/csv; charset=utf-8').header('content-disposition', `attachment; filename="${id}-hindcast-${jobId}-issues.csv"`);
        return issuesCsv(r, r.perIssue, issues);
      }
      return {
        gaugeId: id,
        hindcast: jobId,
        unit: 'm3/s',
        caution: CAUTION,
        probabilities: r.perIssue.probabilities,
        thresholds: r.thresholds,
        issues,
      };
    },
  );
}
