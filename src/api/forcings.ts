import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { ensureForcingVariable, forcingUnits, readForcings, upsertForcing } from '../store/archive-repo.ts';
import { bodyFormat, GaugeParams, readWindow, requireGauge, sendCsv, wantsCsv } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { parseCsv, splitHeader } from './csv.ts';
import { ErrorList } from '../services/problem.ts';
import { TimeWindowQuery } from './schemas.ts';
import { checkTimes, checkValues, csvNumber, isoUtc, knownForcingUnits } from '../services/series-input.ts';
import { parseWith } from './validate.ts';

const VariableName = z.string().regex(/^[a-z][a-z0-9_]{0,47}$/, 'must be lowercase letters, digits and underscores, e.g. precipitation');

const ForcingsBody = z.strictObject({
  times: z.array(z.unknown()).min(1),
  variables: z
    .array(z.strictObject({ name: VariableName, unit: z.string().trim().min(1).max(20), values: z.array(z.unknown()) }))
    .min(1),
});

interface Batch {
  times: unknown[];
  variables: { name: string; unit: string; values: unknown[] }[];
  timeWhere: (i: number) => string;
  valueWhere: (v: number, i: number) => string;
  unitWhere: (v: number) => string;
}

function fromJson(body: unknown, errors: ErrorList): Batch {
  const b = parseWith(ForcingsBody, body, 'body');
  b.variables.forEach((v, k) => {
    if (v.values.length !== b.times.length) {
      errors.add(`body.variables[${k}].values`, `has ${v.values.length} entries but body.times has ${b.times.length}`);
    }
    if (b.variables.findIndex((o) => o.name === v.name) !== k) errors.add(`body.variables[${k}].name`, `${v.name} appears twice`);
  });
  errors.throwIfAny();
  return {
    times: b.times,
    variables: b.variables,
    timeWhere: (i) => `body.times[${i}]`,
    valueWhere: (v, i) => `body.variables[${v}].values[${i}]`,
    unitWhere: (v) => `body.variables[${v}].unit`,
  };
}

/** CSV: `time,precipitation (mm),air_temperature (degC),...` — each value column names its unit. */
function fromCsv(text: string, errors: ErrorList): Batch {
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [timeCol, ...valueCols] = table.header;
  if (timeCol !== 'time') errors.add('line 1', `the first column must be "time", found ${JSON.stringify(timeCol)}`);
  if (!valueCols.length) errors.add('line 1', 'no variable columns; write them as name (unit), e.g. precipitation (mm)');
  const variables = valueCols.map((cell, k) => {
    const { name, unit } = splitHeader(cell);
    if (!VariableName.safeParse(name).success) errors.add(`line 1, column ${k + 2}`, `bad variable name ${JSON.stringify(name)}`);
    if (!unit) errors.add(`line 1, column ${name}`, 'the unit is missing; write the header as name (unit)');
    if (valueCols.findIndex((c) => splitHeader(c).name === name) !== k) errors.add(`line 1, column ${name}`, `${name} appears twice`);
    return { name, unit: unit ?? '', values: table.rows.map((r) => csvNumber(r.cells[k + 1])) };
  });
  if (!table.rows.length) errors.add('line 2', 'no data rows');
  errors.throwIfAny();
  return {
    times: table.rows.map((r) => r.cells[0].trim()),
    variables,
    timeWhere: (i) => `line ${table.rows[i].line}, column time`,
    valueWhere: (v, i) => `line ${table.rows[i].line}, column ${variables[v].name}`,
    unitWhere: (v) => `line 1, column ${variables[v].name}`,
  };
}

export async function forcingRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addRoute(
    app,
    services,
    { method: 'POST', url: '/gauges/:id/forcings', summary: 'Add or correct forcings (precipitation mm per step, air temperature degC, others by name)', tag: 'archive', role: 'ingest', params: GaugeParams, body: ForcingsBody, bodyTypes: ['application/json', 'text/csv'], bodyDecodedByHandler: true },
    async (req) => {
      const errors = new ErrorList();
      const batch = bodyFormat(req) === 'csv' ? fromCsv(req.body as string, errors) : fromJson(req.body, errors);
      return db.transaction(async (tx) => {
        const gauge = await requireGauge(tx, req.params, true);
        const stored = await forcingUnits(tx, gauge.id);
        const times = checkTimes(batch.times, gauge.stepSeconds, batch.timeWhere, errors);
        const columns = batch.variables.map((v, k) => {
          const known = knownForcingUnits[v.name];
          let unit = v.unit;
          if (known) {
            if (!known.aliases.includes(unit)) errors.add(batch.unitWhere(k), `${v.name} must be in ${known.unit}, got ${JSON.stringify(unit)}`);
            unit = known.unit;
          } else if (stored.has(v.name) && stored.get(v.name) !== unit) {
            errors.add(batch.unitWhere(k), `${v.name} is stored in ${stored.get(v.name)}, got ${JSON.stringify(unit)}`);
          }
          const values = checkValues(v.values, { nonNegative: known?.nonNegative ?? false, quantity: v.name }, (i) => batch.valueWhere(k, i), errors);
          return { name: v.name, unit, values };
        });
        errors.throwIfAny();
        let written = 0;
        for (const c of columns) {
          await ensureForcingVariable(tx, gauge.id, c.name, c.unit);
          written += await upsertForcing(tx, gauge.id, c.name, times, c.values);
        }
        return { gaugeId: gauge.id, received: times.length * columns.length, written };
      });
    },
  );

  const ForcingsQuery = TimeWindowQuery.extend({ variables: z.string().optional() });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/forcings', summary: 'Forcings in a time window (JSON or CSV); variables=a,b to choose', tag: 'archive', role: 'read', params: GaugeParams, query: ForcingsQuery, responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const { window } = readWindow({ from: q.from, to: q.to });
      const units = await forcingUnits(db, gauge.id);
      const names = q.variables ? q.variables.split(',').map((s) => s.trim()) : [...units.keys()].sort();
      const rows = await readForcings(db, gauge.id, window, names);
      // Pivot to one time axis: the union of every variable's times.
      const timeSet = [...new Set(rows.map((r) => r.t))].sort((a, b) => a - b);
      const index = new Map(timeSet.map((t, i) => [t, i]));
      const columns = names
        .filter((n) => units.has(n))
        .map((name) => ({ name, unit: units.get(name)!, values: new Array<number | null>(timeSet.length).fill(null) }));
      const byName = new Map(columns.map((c) => [c.name, c]));
      for (const r of rows) byName.get(r.variable)!.values[index.get(r.t)!] = r.value;
      if (wantsCsv(req, q.format)) {
        return sendCsv(reply, `${gauge.id}-forcings.csv`, [
          ['time', ...columns.map((c) => `${c.name} (${c.unit})`)].join(','),
          ...timeSet.map((t, i) => [isoUtc(t), ...columns.map((c) => c.values[i] ?? '')].join(',')),
        ]);
      }
      return { gaugeId: gauge.id, times: timeSet.map(isoUtc), variables: columns };
    },
  );
}
