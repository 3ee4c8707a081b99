import type { FastifyInstance, FastifyRequest } from 'fastify';
import { z } from 'zod';
import { RunCorrection, type RunDraft, type RunForm } from '../services/correct-run.ts';
import { badRequest, invalid, Problem, type FieldError } from '../services/problem.ts';
import { serverTiming } from '../services/stage-clock.ts';
import { GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { sendCaution } from './formats.ts';
import { runFromCsv, runFromNetcdf, type DecodedRun } from './run-forms.ts';
import { MemberId, Rfc3339 } from './schemas.ts';
import { formatPath } from './validate.ts';

const Quantiles = z
  .array(z.number().gt(0).lt(1))
  .min(1)
  .max(99)
  .refine((q) => q.every((p, i) => i === 0 || p > q[i - 1]), 'quantiles must be strictly increasing');

export const RunBody = z.strictObject({
  issueTime: Rfc3339,
  /** Which forecast system or cycle made the run; with gauge and issue time it names the run. */
  source: z.string().regex(/^[A-Za-z0-9][A-Za-z0-9_.:-]{0,63}$/, 'letters, digits and _ . : - (1–64)').default('default'),
  /** Flow unit of the values: m3/s (or m3 s-1); l/s (L s-1) and ft3/s (ft3 s-1, cfs) are converted. */
  unit: z.string(),
  /**
   * How many of each member's first values are at or before issue time. 0 (the default): the run
   * holds the lead times only and the model's warm-up comes from the stored archive.
   */
  warmupSteps: z.number().int().min(0).max(1000).default(0),
  members: z.array(z.strictObject({ id: MemberId, values: z.array(z.unknown()).min(1).max(5000) })).min(1).max(1000),
  /**
   * Forecast forcings, one value per lead time (the archive gives earlier ones), or laid out like
   * the members' values (warm-up then lead times).
   */
  forcings: z.record(z.string().regex(/^[a-z][a-z0-9_]{0,47}$/), z.array(z.unknown())).optional(),
  /**
   * Observed flow at issue time, in the body's unit: the run is updated on it (it wins over the
   * stored observations) and it is stored with the run; also read by models that use the last known error.
   */
  issueObservation: z.number().finite().nonnegative().nullable().optional(),
  quantiles: Quantiles.optional(),
  trajectories: z.number().int().min(10).optional(),
  seed: z.number().int().min(0).max(2 ** 31 - 1).optional(),
  seasonalWindowDays: z.number().int().min(0).max(183).nullable().default(60),
});

/** For CSV and NetCDF bodies, the run's options travel in the query string. */
const RunQuery = z.strictObject({
  source: z.string().optional(),
  quantiles: z
    .string()
    .transform((s) => s.split(',').map((p) => Number(p.trim())))
    .optional(),
  trajectories: z.coerce.number().optional(),
  seed: z.coerce.number().optional(),
  seasonalWindowDays: z.union([z.literal('none').transform(() => null), z.coerce.number()]).optional(),
  issueObservation: z.coerce.number().optional(),
  /** NetCDF: the flow variable's name when more than one variable has a flow unit. */
  variable: z.string().max(100).optional(),
});

const MEDIA = { json: 'application/json', csv: 'text/csv', netcdf: 'application/x-netcdf' } as const;

/** The body's form from its Content-Type. */
function bodyForm(req: FastifyRequest): RunForm['form'] {
  const type = (req.headers['content-type'] ?? 'application/json').split(';')[0].trim().toLowerCase();
  if (type === 'text/csv') return 'csv';
  if (type === 'application/x-netcdf' || type === 'application/netcdf') return 'netcdf';
  return 'json';
}

/**
 * The fields of a body the wire schema can read, and every problem it found. Where the schema
 * refuses a field the draft leaves it out, so the later checks still run on the rest and one
 * answer lists everything.
 */
export function readRunDraft(raw: unknown): { draft: RunDraft; errors: FieldError[] } {
  const full = RunBody.safeParse(raw);
  if (full.success) return { draft: full.data, errors: [] };
  const errors = full.error.issues.slice(0, 50).map((issue) => ({ path: formatPath('body', issue.path), message: issue.message }));
  const draft: Record<string, unknown> = {};
  if (raw !== null && typeof raw === 'object' && !Array.isArray(raw)) {
    const fields = raw as Record<string, unknown>;
    for (const [key, schema] of Object.entries(RunBody.shape)) {
      if (key === 'members') continue;
      const r = (schema as z.ZodType).safeParse(fields[key]);
      if (r.success && r.data !== undefined) draft[key] = r.data;
    }
    if (Array.isArray(fields.members)) {
      draft.members = fields.members.map((m: unknown) => {
        const member = (m !== null && typeof m === 'object' ? m : {}) as Record<string, unknown>;
        const id = MemberId.safeParse(member.id);
        return { id: id.success ? id.data : undefined, values: Array.isArray(member.values) ? member.values : undefined };
      });
    }
  }
  return { draft: draft as RunDraft, errors };
}

/** A CSV or NetCDF body as the JSON body it stands for, with the query's options. */
async function decodeOther(form: 'csv' | 'netcdf', body: unknown, query: z.output<typeof RunQuery>, stepSeconds: number): Promise<DecodedRun> {
  const decoded = form === 'csv' ? (typeof body === 'string' && body.trim() ? runFromCsv(body, stepSeconds) : null) : Buffer.isBuffer(body) && body.length ? await runFromNetcdf(body, stepSeconds, query.variable) : null;
  if (!decoded) throw badRequest(`the ${form === 'csv' ? 'CSV' : 'NetCDF'} body is empty`, [{ path: 'body', message: 'empty' }]);
  const { variable: _variable, ...options } = query;
  Object.assign(decoded.json, Object.fromEntries(Object.entries(options).filter(([, v]) => v !== undefined)));
  return decoded;
}

/** POST /gauges/:id/runs: the use case is src/services/correct-run.ts; the forms are read in run-forms.ts. */
export async function runRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db, config, pool, metrics } = services;
  const correction = new RunCorrection({ db, config, pool, metrics });
  // When each request arrived and when its body was read and parsed, for the Server-Timing header.
  const arrived = new WeakMap<object, number>();
  const parsed = new WeakMap<object, number>();
  app.addHook('onRequest', async (req) => {
    arrived.set(req, performance.now());
  });
  app.addHook('preHandler', async (req) => {
    parsed.set(req, performance.now());
  });

  addRoute(
    app,
    services,
    {
      method: 'POST',
      url: '/gauges/:id/runs',
      summary:
        'Post a raw ensemble run (JSON, CSV `issue_time,member,lead_time,flow (m3/s)[,forcing (unit)...]`, or CF-convention NetCDF with dimensions realization × time); answers with corrected quantiles, exceedance probabilities, the caution, and what was taken from the archive',
      tag: 'forecasts',
      role: 'ingest',
      params: GaugeParams,
      query: RunQuery,
      body: RunBody,
      bodyDecodedByHandler: true,
      bodyTypes: [MEDIA.json, MEDIA.csv, MEDIA.netcdf],
    },
    async (req, reply) => {
      const started = performance.now();
      const gauge = await requireGauge(db, req.params);
      const form = bodyForm(req);
      const hasOptions = Object.values(req.query).some((v) => v !== undefined);
      if (form === 'json' && hasOptions) throw invalid([{ path: 'query', message: 'query options are for CSV and NetCDF bodies; a JSON body carries them as fields' }]);
      const decoded = form === 'json' ? null : await decodeOther(form, req.body, req.query, gauge.stepSeconds);
      const { draft, errors } = readRunDraft(decoded ? decoded.json : req.body);
      const key = req.headers['idempotency-key'];
      sendCaution(reply);
      let answer;
      try {
        answer = await correction.correct(gauge, draft, errors, typeof key === 'string' ? key : null, req.log, started, form);
      } catch (err) {
        // Paths of the JSON shape, named as the CSV line or NetCDF variable the value came from.
        if (decoded && err instanceof Problem && err.status === 422) throw invalid(err.errors.map((e) => ({ path: decoded.where(e.path), message: e.message })), err.detail);
        throw err;
      }
      if (!answer.created) {
        const { stored } = answer;
        reply.code(200).header('etag', stored.etag).header('idempotent-replayed', 'true').header('location', `/forecasts/${stored.id}`).type('application/json');
        return stored.output;
      }
      const t0 = arrived.get(req) ?? started;
      const t1 = parsed.get(req) ?? started;
      // parse: reading and parsing the body (and the auth hooks); validate: the wire schema.
      const stages = { parse: t1 - t0, ...answer.stageMs, validate: started - t1 + (answer.stageMs.validate ?? 0) };
      reply.header('server-timing', serverTiming({ ...stages, total: performance.now() - t0 }));
      reply.code(201).header('etag', answer.etag).header('location', `/forecasts/${answer.id}`).type('application/json');
      return answer.output;
    },
  );
}
