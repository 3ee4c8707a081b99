import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { ensureMembers, readSimulations, upsertSimulation } from '../store/archive-repo.ts';
import { bodyFormat, GaugeParams, readWindow, requireGauge, sendCsv, wantsCsv } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { parseCsv, splitHeader } from './csv.ts';
import { ErrorList } from '../services/problem.ts';
import { MemberId, TimeWindowQuery } from './schemas.ts';
import { checkFlowUnit, checkTimes, checkValues, csvNumber, isoUtc } from '../services/series-input.ts';
import { parseWith } from './validate.ts';

const SimulationsBody = z.strictObject({
  unit: z.string(),
  times: z.array(z.unknown()).min(1),
  members: z.array(z.strictObject({ id: MemberId, values: z.array(z.unknown()) })).min(1),
});

interface Batch {
  times: unknown[];
  members: { id: string; values: unknown[] }[];
  timeWhere: (i: number) => string;
  valueWhere: (m: number, i: number) => string;
}

function fromJson(body: unknown, errors: ErrorList): Batch {
  const b = parseWith(SimulationsBody, body, 'body');
  checkFlowUnit(b.unit, 'body.unit', errors);
  b.members.forEach((m, k) => {
    if (m.values.length !== b.times.length) errors.add(`body.members[${k}].values`, `has ${m.values.length} entries but body.times has ${b.times.length}`);
    if (b.members.findIndex((o) => o.id === m.id) !== k) errors.add(`body.members[${k}].id`, `member ${m.id} appears twice`);
  });
  errors.throwIfAny();
  return { times: b.times, members: b.members, timeWhere: (i) => `body.times[${i}]`, valueWhere: (m, i) => `body.members[${m}].values[${i}]` };
}

/** CSV: `time,<member> (m3/s),<member> (m3/s),...` — one column per member (parameter set). */
function fromCsv(text: string, errors: ErrorList): Batch {
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [timeCol, ...memberCols] = table.header;
  if (timeCol !== 'time') errors.add('line 1', `the first column must be "time", found ${JSON.stringify(timeCol)}`);
  if (!memberCols.length) errors.add('line 1', 'no member columns; write them as member-id (m3/s)');
  const members = memberCols.map((cell, k) => {
    const { name, unit } = splitHeader(cell);
    if (!MemberId.safeParse(name).success) errors.add(`line 1, column ${k + 2}`, `bad member id ${JSON.stringify(name)}`);
    checkFlowUnit(unit, `line 1, column ${name}`, errors);
    if (memberCols.findIndex((c) => splitHeader(c).name === name) !== k) errors.add(`line 1, column ${name}`, `member ${name} appears twice`);
    return { id: name, values: table.rows.map((r) => csvNumber(r.cells[k + 1])) };
  });
  if (!table.rows.length) errors.add('line 2', 'no data rows');
  errors.throwIfAny();
  return {
    times: table.rows.map((r) => r.cells[0].trim()),
    members,
    timeWhere: (i) => `line ${table.rows[i].line}, column time`,
    valueWhere: (m, i) => `line ${table.rows[i].line}, column ${members[m].id}`,
  };
}

export async function simulationRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(
    app,
    services,
    { method: 'POST', url: '/gauges/:id/simulations', summary: "Add the raw model's continuous simulation per member (upsert by member and time)", tag: 'archive', role: 'ingest', params: GaugeParams, body: SimulationsBody, bodyTypes: ['application/json', 'text/csv'], bodyDecodedByHandler: true },
    async (req) => {
      const errors = new ErrorList();
      const batch = bodyFormat(req) === 'csv' ? fromCsv(req.body as string, errors) : fromJson(req.body, errors);
      return db.transaction(async (tx) => {
        const gauge = await requireGauge(tx, req.params, true);
        const times = checkTimes(batch.times, gauge.stepSeconds, batch.timeWhere, errors);
        const columns = batch.members.map((m, k) => ({
          id: m.id,
          values: checkValues(m.values, { nonNegative: true, quantity: 'flow' }, (i) => batch.valueWhere(k, i), errors),
        }));
        errors.throwIfAny();
        await ensureMembers(tx, gauge.id, columns.map((c) => c.id));
        let written = 0;
        for (const c of columns) written += await upsertSimulation(tx, gauge.id, c.id, times, c.values);
        return { gaugeId: gauge.id, received: times.length * columns.length, written };
      });
    },
  );

  const SimulationsQuery = TimeWindowQuery.extend({ members: z.string().optional() });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/simulations', summary: 'Member simulations in a time window (JSON or CSV); members=a,b to choose', tag: 'archive', role: 'read', params: GaugeParams, query: SimulationsQuery, responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const { window } = readWindow({ from: q.from, to: q.to });
      const rows = await readSimulations(db, gauge.id, window, q.members?.split(',').map((s) => s.trim()));
      const timeSet = [...new Set(rows.map((r) => r.t))].sort((a, b) => a - b);
      const index = new Map(timeSet.map((t, i) => [t, i]));
      const members = new Map<string, (number | null)[]>();
      for (const r of rows) {
        let values = members.get(r.member_id);
        if (!values) members.set(r.member_id, (values = new Array(timeSet.length).fill(null)));
        values[index.get(r.t)!] = r.value;
      }
      const list = [...members].map(([id, values]) => ({ id, values }));
      if (wantsCsv(req, q.format)) {
        return sendCsv(reply, `${gauge.id}-simulations.csv`, [
          ['time', ...list.map((m) => `${m.id} (m3/s)`)].join(','),
          ...timeSet.map((t, i) => [isoUtc(t), ...list.map((m) => m.values[i] ?? '')].join(',')),
        ]);
      }
      return { gaugeId: gauge.id, unit: 'm3/s', times: timeSet.map(isoUtc), members: list };
    },
  );
}
