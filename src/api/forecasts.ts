import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { z } from 'zod';
import { getRun, getRunWithPercentiles, latestRunTag, listRuns } from '../store/forecasts-repo.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { forecastCsv, forecastText, quantileSetCsv, storedQuantileSet, withMembers, type ForecastView, type MembersChoice } from '../services/forecast-view.ts';
import { chooseFormat, FormatOnly, sendCaution, type Format } from './formats.ts';
import { invalid, notFound } from '../services/problem.ts';
import { ForecastAnswer, Rfc3339, RunSummaryAnswer } from './schemas.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

const RunListAnswer = z.object({
  gaugeId: z.string(),
  runs: z.array(
    z.object({ id: z.string(), issueTime: z.string(), source: z.string(), status: z.string(), modelVersionId: z.string().nullable(), thresholds: z.array(RunSummaryAnswer), createdAt: z.string(), href: z.string() }),
  ),
});

const FormatQuery = z.strictObject({
  format: FormatOnly,
  members: z
    .enum(['none', 'corrected', 'all'])
    .default('all')
    .describe('member series in the JSON: none (quantiles and probabilities only, the smallest answer), corrected, or all (raw and corrected, as stored)'),
});

interface SendableRun {
  etag: string;
  output: string;
  /** JSON answers with fewer members, made once per run and kept while the run is cached. */
  trimmed?: Map<MembersChoice, string>;
}

/** Sends a stored run in the chosen format with a strong ETag per representation; 304 when unchanged. */
function sendRun(req: FastifyRequest, reply: FastifyReply, run: SendableRun, format: Format, members: MembersChoice, cacheControl: string) {
  const variant = format === 'json' ? (members === 'all' ? '' : `-members-${members}`) : `-${format}`;
  const etag = variant ? `${run.etag.slice(0, -1)}${variant}"` : run.etag;
  reply.header('etag', etag).header('cache-control', cacheControl).header('vary', 'accept');
  sendCaution(reply);
  const match = req.headers['if-none-match'];
  if (match && match.split(',').some((t) => t.trim() === etag || t.trim() === '*')) {
    reply.code(304);
    return '';
  }
  if (format === 'json') {
    reply.type('application/json');
    if (members === 'all') return run.output;
    run.trimmed ??= new Map();
    let body = run.trimmed.get(members);
    if (body === undefined) run.trimmed.set(members, (body = withMembers(run.output, members)));
    return body;
  }
  const view = JSON.parse(run.output) as ForecastView;
  if (format === 'csv') {
    reply.type('text/csv; charset=utf-8');
    return forecastCsv(view);
  }
  reply.type('text/plain; charset=utf-8');
  return forecastText(view);
}

export async function forecastRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  // The newest run's id is read on every request (one indexed row), so a run stored by any
  // instance is served by every instance as soon as its post was answered; only the body (some
  // 100 kB to 1 MB) is kept per gauge, by run id, and runs never change once stored.
  const latest = new Map<string, { id: string } & SendableRun>();

  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/forecasts/latest', summary: "The gauge's newest corrected forecast (JSON, CSV or a plain-text table; ETag and 304); members=none|corrected|all trims the JSON for dashboards", tag: 'forecasts', role: 'read', params: GaugeParams, query: FormatQuery, response: ForecastAnswer, responseTypes: ['application/json', 'text/csv', 'text/plain'] },
    async (req, reply) => {
      const { id } = req.params;
      const { format, members } = req.query;
      const tag = await latestRunTag(db, id);
      if (!tag) {
        latest.delete(id);
        await requireGauge(db, req.params);
        throw notFound(`gauge ${id} has no forecast yet`);
      }
      let hit = latest.get(id);
      if (hit?.id !== tag.id) {
        const run = await getRun(db, tag.id);
        if (!run) throw notFound(`gauge ${id} has no forecast yet`);
        hit = { id: run.id, etag: run.etag, output: run.output };
        latest.set(id, hit);
      }
      return sendRun(req, reply, hit, chooseFormat(req, format), members, 'private, max-age=10, must-revalidate');
    },
  );

  const RunParams = z.object({ runId: z.string().uuid('must be a run id') });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/forecasts/:runId', summary: 'One stored run by id (JSON, CSV or text)', tag: 'forecasts', role: 'read', params: RunParams, query: FormatQuery, response: ForecastAnswer, responseTypes: ['application/json', 'text/csv', 'text/plain'] },
    async (req, reply) => {
      const { runId } = req.params;
      const { format, members } = req.query;
      const run = await getRun(db, runId);
      if (!run) throw notFound(`no run ${runId}`);
      return sendRun(req, reply, run, chooseFormat(req, format), members, 'private, max-age=86400, immutable');
    },
  );

  const LevelsQuery = z.strictObject({
    /** `all` (the default): every stored level; or a comma-separated list of stored levels. */
    levels: z
      .string()
      .regex(/^(all|0?\.\d+(,\s*0?\.\d+)*)$/, 'all, or probability levels such as 0.005,0.5,0.995')
      .default('all'),
    format: z.enum(['json', 'csv']).optional(),
  });
  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/forecasts/:runId/quantiles',
      summary: "A stored run's full quantile set: the levels it was asked for and the 100 midpoint levels (i − 0.5)/100 stored for verification (JSON or CSV); levels=all or a list",
      tag: 'forecasts',
      role: 'read',
      params: RunParams,
      query: LevelsQuery,
      response: z.object({ runId: z.string(), gaugeId: z.string(), issueTime: z.string(), unit: z.literal('m3/s'), caution: z.string(), leadTimes: z.array(z.string()), validTimes: z.array(z.string()), quantiles: z.object({ probabilities: z.array(z.number()), values: z.array(z.array(z.number())) }) }),
      responseTypes: ['application/json', 'text/csv'],
    },
    async (req, reply) => {
      const { runId } = req.params;
      const run = await getRunWithPercentiles(db, runId);
      if (!run) throw notFound(`no run ${runId}`);
      const view = JSON.parse(run.output) as ForecastView;
      let set = storedQuantileSet(view, run.percentiles);
      if (req.query.levels !== 'all') {
        const asked = req.query.levels.split(',').map((x) => Number(x.trim()));
        const rows = asked.map((p) => set.probabilities.findIndex((x) => Math.abs(x - p) < 1e-9));
        const missing = asked.filter((_, i) => rows[i] < 0);
        if (missing.length) throw invalid([{ path: 'query.levels', message: `not stored with this run: ${missing.join(', ')}; stored are ${set.probabilities.length} levels (levels=all lists them)` }]);
        set = { probabilities: rows.map((i) => set.probabilities[i]), values: rows.map((i) => set.values[i]) };
      }
      sendCaution(reply);
      reply.header('cache-control', 'private, max-age=86400, immutable').header('vary', 'accept');
      if (chooseFormat(req, req.query.format) === 'csv') {
        reply.type('text/csv; charset=utf-8');
        return quantileSetCsv(view, set);
      }
      return { runId, gaugeId: view.gaugeId, issueTime: view.issueTime, unit: view.unit, caution: view.caution, leadTimes: view.leadTimes, validTimes: view.validTimes, quantiles: set };
    },
  );

  const WindowQuery = z.strictObject({ from: Rfc3339.optional(), to: Rfc3339.optional(), limit: z.coerce.number().int().min(1).max(5000).default(500) });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/forecasts', summary: 'Runs issued in a time window, newest first, with their threshold summaries', tag: 'forecasts', role: 'read', params: GaugeParams, query: WindowQuery, response: RunListAnswer },
    async (req) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const runs = await listRuns(db, gauge.id, q.from ? rfc3339Ms(q.from) : undefined, q.to ? rfc3339Ms(q.to) : undefined, q.limit);
      return { gaugeId: gauge.id, runs };
    },
  );
}
