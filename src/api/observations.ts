import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { scheduleGaugeStatusRefresh } from '../services/drift.ts';
import { readObservations, upsertObservations } from '../store/archive-repo.ts';
import { bodyFormat, GaugeParams, readWindow, requireGauge, sendCsv, wantsCsv } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { csvCell, parseCsv, splitHeader } from './csv.ts';
import { ErrorList } from '../services/problem.ts';
import { TimeWindowQuery } from './schemas.ts';
import { checkFlowUnit, checkTimes, checkValues, csvNumber, isoUtc } from '../services/series-input.ts';
import { parseWith } from './validate.ts';

const ObservationsBody = z.strictObject({
  unit: z.string(),
  times: z.array(z.unknown()).min(1),
  values: z.array(z.unknown()).min(1),
  quality: z.array(z.string().max(32).nullable()).optional(),
});

interface Batch {
  times: unknown[];
  values: unknown[];
  quality: (string | null)[] | null;
  where: (i: number, field: string) => string;
}

function fromJson(body: unknown, errors: ErrorList): Batch {
  const b = parseWith(ObservationsBody, body, 'body');
  checkFlowUnit(b.unit, 'body.unit', errors);
  if (b.values.length !== b.times.length) {
    errors.add('body.values', `has ${b.values.length} entries but body.times has ${b.times.length}`);
  }
  if (b.quality && b.quality.length !== b.times.length) {
    errors.add('body.quality', `has ${b.quality.length} entries but body.times has ${b.times.length}`);
  }
  errors.throwIfAny();
  return { times: b.times, values: b.values, quality: b.quality ?? null, where: (i, field) => `body.${field}[${i}]` };
}

/** CSV: `time,flow (m3/s)[,quality]`. */
function fromCsv(text: string, errors: ErrorList): Batch {
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [timeCol, flowCol, qualityCol, ...rest] = table.header;
  const flow = splitHeader(flowCol ?? '');
  if (timeCol !== 'time') errors.add('line 1', `the first column must be "time", found ${JSON.stringify(timeCol)}`);
  if (flow.name !== 'flow') errors.add('line 1', `the second column must be "flow (m3/s)", found ${JSON.stringify(flowCol)}`);
  else checkFlowUnit(flow.unit, 'line 1, column flow', errors);
  if (qualityCol !== undefined && qualityCol !== 'quality') errors.add('line 1', `the third column may only be "quality", found ${JSON.stringify(qualityCol)}`);
  if (rest.length) errors.add('line 1', `unexpected columns: ${rest.join(', ')}`);
  if (!table.rows.length) errors.add('line 2', 'no data rows');
  errors.throwIfAny();
  return {
    times: table.rows.map((r) => r.cells[0].trim()),
    values: table.rows.map((r) => csvNumber(r.cells[1])),
    quality: qualityCol ? table.rows.map((r) => r.cells[2].trim() || null) : null,
    where: (i, field) => `line ${table.rows[i].line}, column ${field === 'times' ? 'time' : 'flow'}`,
  };
}

export async function observationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(
    app,
    services,
    { method: 'POST', url: '/gauges/:id/observations', summary: 'Add or correct observed flow (upsert by time)', tag: 'archive', role: 'ingest', params: GaugeParams, body: ObservationsBody, bodyTypes: ['application/json', 'text/csv'], bodyDecodedByHandler: true },
    async (req) => {
      const errors = new ErrorList();
      const batch = bodyFormat(req) === 'csv' ? fromCsv(req.body as string, errors) : fromJson(req.body, errors);
      const out = await db.transaction(async (tx) => {
        const gauge = await requireGauge(tx, req.params, true);
        const times = checkTimes(batch.times, gauge.stepSeconds, (i) => batch.where(i, 'times'), errors);
        const values = checkValues(batch.values, { nonNegative: true, quantity: 'flow' }, (i) => batch.where(i, 'values'), errors);
        errors.throwIfAny();
        const written = await upsertObservations(tx, gauge.id, times, values, batch.quality);
        return { gaugeId: gauge.id, received: times.length, written };
      });
      // New observations verify stored runs: refresh the drift status after the commit, off this request.
      if (out.written > 0) scheduleGaugeStatusRefresh(db, out.gaugeId, req.log);
      return out;
    },
  );

  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/observations', summary: 'Observed flow in a time window (JSON or CSV)', tag: 'archive', role: 'read', params: GaugeParams, query: TimeWindowQuery, responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const { window, format } = readWindow(req.query);
      const rows = await readObservations(db, gauge.id, window);
      if (wantsCsv(req, format)) {
        return sendCsv(reply, `${gauge.id}-observations.csv`, [
          'time,flow (m3/s),quality',
          ...rows.map((r) => `${isoUtc(r.t)},${r.value ?? ''},${csvCell(r.quality)}`),
        ]);
      }
      return {
        gaugeId: gauge.id,
        unit: 'm3/s',
        times: rows.map((r) => isoUtc(r.t)),
        values: rows.map((r) => r.value),
        quality: rows.map((r) => r.quality),
      };
    },
  );
}
