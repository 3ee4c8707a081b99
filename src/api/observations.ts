import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { scheduleGaugeStatusRefresh } from '../services/drift.ts';
import { upsertObservations } from '../store/archive-repo.ts';
import { observationsStream, sendStream } from './archive-stream.ts';
import { GaugeParams, readWindow, requireGauge, wantsCsv } from './archive-common.ts';
import { addIngestRoute, timeColumnsFromCsv, timeColumnsFromJson, type TimeColumns } from './archive-ingest.ts';
import { addRoute, type Services } from './context.ts';
import { TimeWindowQuery } from './schemas.ts';
import { flowLimit } from '../services/plausible-values.ts';
import { checkFlowUnit, checkTimes, checkValues } from '../services/series-input.ts';
import { raiseArchiveMaxFlow } from '../store/gauges-repo.ts';

const ObservationsBody = z.strictObject({
  unit: z.string(),
  times: z.array(z.unknown()).min(1),
  values: z.array(z.unknown()).min(1),
  quality: z.array(z.string().max(32).nullable()).optional(),
});

export async function observationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addIngestRoute(app, services, {
    resource: 'observations',
    summary: 'Add or correct observed flow (upsert by time)',
    body: ObservationsBody,
    decode: (input, _gauge, errors): TimeColumns => {
      if ('json' in input) {
        const b = input.json;
        checkFlowUnit(b.unit, 'body.unit', errors);
        const columns = [{ name: 'flow', unit: b.unit, values: b.values }, ...(b.quality ? [{ name: 'quality', unit: null, values: b.quality }] : [])];
        const path = (k: number) => (k === 0 ? 'body.values' : 'body.quality');
        return timeColumnsFromJson(b.times, columns, { values: path, name: path, unit: () => 'body.unit', duplicate: () => '' }, errors);
      }
      // CSV: `time,flow (m3/s)[,quality]`.
      const batch = timeColumnsFromCsv(input.csv, errors, { noColumns: 'the second column must be "flow (m3/s)"', duplicate: (name) => `${name} appears twice`, textColumns: ['quality'] });
      const [flow, quality, ...rest] = batch.columns;
      if (flow && flow.name !== 'flow') errors.add('line 1', `the second column must be "flow (m3/s)", found ${JSON.stringify(batch.headers[0])}`);
      else if (flow) checkFlowUnit(flow.unit, 'line 1, column flow', errors);
      if (quality && (quality.name !== 'quality' || quality.unit !== null)) errors.add('line 1', `the third column may only be "quality", found ${JSON.stringify(batch.headers[1])}`);
      if (rest.length) errors.add('line 1', `unexpected columns: ${batch.headers.slice(2).join(', ')}`);
      return batch;
    },
    check: (_tx, gauge, batch, errors) => ({
      times: checkTimes(batch.times, gauge.stepSeconds, batch.timeWhere, errors),
      values: checkValues(batch.columns[0].values, flowLimit(gauge), (i) => batch.valueWhere(0, i), errors),
      quality: (batch.columns[1]?.values as (string | null)[] | undefined) ?? null,
    }),
    store: async (tx, gauge, c) => {
      const written = await upsertObservations(tx, gauge.id, c.times, c.values, c.quality);
      await raiseArchiveMaxFlow(tx, gauge.id, c.values);
      return { received: c.times.length, written };
    },
    // New observations verify stored runs: refresh the drift status after the commit, off this request.
    after: (r, log) => {
      if (r.written > 0) scheduleGaugeStatusRefresh(db, r.gaugeId, log);
    },
  });

  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/observations', summary: 'Observed flow in a time window (JSON or CSV)', tag: 'archive', role: 'read', params: GaugeParams, query: TimeWindowQuery, response: z.object({ gaugeId: z.string(), unit: z.literal('m3/s'), times: z.array(z.string()), values: z.array(z.number().nullable()), quality: z.array(z.string().nullable()) }), responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const { window, format } = readWindow(req.query);
      const csv = wantsCsv(req, format);
      return sendStream(reply, observationsStream(db, gauge.id, window, csv), csv ? `${gauge.id}-observations.csv` : undefined);
    },
  );
}
