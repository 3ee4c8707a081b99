import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { ensureMembers, upsertSimulations } from '../store/archive-repo.ts';
import { sendStream, simulationsStream } from './archive-stream.ts';
import { GaugeParams, readWindow, requireGauge, wantsCsv } from './archive-common.ts';
import { addIngestRoute, timeColumnsFromCsv, timeColumnsFromJson, type TimeColumns } from './archive-ingest.ts';
import { addRoute, type Services } from './context.ts';
import { MemberId, TimeWindowQuery } from './schemas.ts';
import { flowLimit } from '../services/plausible-values.ts';
import { checkFlowUnit, checkTimes, checkValues } from '../services/series-input.ts';
import { raiseArchiveMaxFlow } from '../store/gauges-repo.ts';

const SimulationsBody = z.strictObject({
  unit: z.string(),
  times: z.array(z.unknown()).min(1),
  members: z.array(z.strictObject({ id: MemberId, values: z.array(z.unknown()) })).min(1),
});

export async function simulationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addIngestRoute(app, services, {
    resource: 'simulations',
    summary: "Add the raw model's continuous simulation per member (upsert by member and time)",
    body: SimulationsBody,
    decode: (input, _gauge, errors): TimeColumns => {
      if ('json' in input) {
        const b = input.json;
        checkFlowUnit(b.unit, 'body.unit', errors);
        const columns = b.members.map((m) => ({ name: m.id, unit: b.unit, values: m.values }));
        return timeColumnsFromJson(b.times, columns, { values: (k) => `body.members[${k}].values`, name: (k) => `body.members[${k}].id`, unit: () => 'body.unit', duplicate: (id) => `member ${id} appears twice` }, errors);
      }
      // CSV: `time,<member> (m3/s),<member> (m3/s),...` — one column per member (parameter set).
      const batch = timeColumnsFromCsv(input.csv, errors, { noColumns: 'no member columns; write them as member-id (m3/s)', duplicate: (id) => `member ${id} appears twice` });
      batch.columns.forEach((c, k) => {
        if (!MemberId.safeParse(c.name).success) errors.add(`line 1, column ${k + 2}`, `bad member id ${JSON.stringify(c.name)}`);
        checkFlowUnit(c.unit, batch.columnWhere(k), errors);
      });
      return batch;
    },
    check: (_tx, gauge, batch, errors) => ({
      times: checkTimes(batch.times, gauge.stepSeconds, batch.timeWhere, errors),
      columns: batch.columns.map((c, k) => ({ id: c.name, values: checkValues(c.values, flowLimit(gauge), (i) => batch.valueWhere(k, i), errors) })),
    }),
    store: async (tx, gauge, { times, columns }) => {
      await ensureMembers(tx, gauge.id, columns.map((c) => c.id));
      const written = await upsertSimulations(tx, gauge.id, times, columns);
      for (const c of columns) await raiseArchiveMaxFlow(tx, gauge.id, c.values);
      return { received: times.length * columns.length, written };
    },
  });

  const SimulationsQuery = TimeWindowQuery.extend({ members: z.string().optional() });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/simulations', summary: 'Member simulations in a time window (JSON or CSV); members=a,b to choose', tag: 'archive', role: 'read', params: GaugeParams, query: SimulationsQuery, response: z.object({ gaugeId: z.string(), unit: z.literal('m3/s'), times: z.array(z.string()), members: z.array(z.looseObject({ id: z.string(), values: z.array(z.number().nullable()) })) }), responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const { window } = readWindow({ from: q.from, to: q.to });
      const csv = wantsCsv(req, q.format);
      const members = q.members?.split(',').map((s) => s.trim());
      return sendStream(reply, simulationsStream(db, gauge.id, window, members, csv), csv ? `${gauge.id}-simulations.csv` : undefined);
    },
  );
}
