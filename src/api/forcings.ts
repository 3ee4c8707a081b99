import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { ensureForcingVariable, forcingUnits, upsertForcings } from '../store/archive-repo.ts';
import { forcingsStream, sendStream } from './archive-stream.ts';
import { GaugeParams, readWindow, requireGauge, wantsCsv } from './archive-common.ts';
import { addIngestRoute, timeColumnsFromCsv, timeColumnsFromJson, type TimeColumns } from './archive-ingest.ts';
import { addRoute, type Services } from './context.ts';
import { Series, TimeWindowQuery } from './schemas.ts';
import { forcingLimit } from '../services/plausible-values.ts';
import { checkTimes, checkValues, knownForcingUnits } from '../services/series-input.ts';

const VariableName = z.string().regex(/^[a-z][a-z0-9_]{0,47}$/, 'must be lowercase letters, digits and underscores, e.g. precipitation');

const ForcingsBody = z.strictObject({
  times: z.array(z.unknown()).min(1),
  variables: z
    .array(z.strictObject({ name: VariableName, unit: z.string().trim().min(1).max(20), values: z.array(z.unknown()) }))
    .min(1),
});

export async function forcingRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addIngestRoute(app, services, {
    resource: 'forcings',
    summary: 'Add or correct forcings (precipitation mm per step, air temperature degC, others by name)',
    body: ForcingsBody,
    decode: (input, _gauge, errors): TimeColumns & { unitWhere: (k: number) => string } => {
      if ('json' in input) {
        const b = input.json;
        const paths = { values: (k: number) => `body.variables[${k}].values`, name: (k: number) => `body.variables[${k}].name`, unit: (k: number) => `body.variables[${k}].unit`, duplicate: (name: string) => `${name} appears twice` };
        return timeColumnsFromJson(b.times, b.variables, paths, errors);
      }
      // CSV: `time,precipitation (mm),air_temperature (degC),...` — each value column names its unit.
      const batch = timeColumnsFromCsv(input.csv, errors, { noColumns: 'no variable columns; write them as name (unit), e.g. precipitation (mm)', duplicate: (name) => `${name} appears twice` });
      batch.columns.forEach((c, k) => {
        if (!VariableName.safeParse(c.name).success) errors.add(`line 1, column ${k + 2}`, `bad variable name ${JSON.stringify(c.name)}`);
        if (!c.unit) errors.add(batch.columnWhere(k), 'the unit is missing; write the header as name (unit)');
      });
      return { ...batch, unitWhere: batch.columnWhere };
    },
    check: async (tx, gauge, batch, errors) => {
      const stored = await forcingUnits(tx, gauge.id);
      const times = checkTimes(batch.times, gauge.stepSeconds, batch.timeWhere, errors);
      const columns = batch.columns.map((v, k) => {
        const known = knownForcingUnits[v.name];
        let unit = v.unit ?? '';
        if (known) {
          if (!known.aliases.includes(unit)) errors.add(batch.unitWhere(k), `${v.name} must be in ${known.unit}, got ${JSON.stringify(unit)}`);
          unit = known.unit;
        } else if (stored.has(v.name) && stored.get(v.name) !== unit) {
          errors.add(batch.unitWhere(k), `${v.name} is stored in ${stored.get(v.name)}, got ${JSON.stringify(unit)}`);
        }
        const values = checkValues(v.values, forcingLimit(gauge, v.name, unit), (i) => batch.valueWhere(k, i), errors);
        return { name: v.name, unit, values };
      });
      return { times, columns };
    },
    store: async (tx, gauge, { times, columns }) => {
      for (const c of columns) await ensureForcingVariable(tx, gauge.id, c.name, c.unit);
      const written = await upsertForcings(tx, gauge.id, times, columns);
      return { received: times.length * columns.length, written };
    },
  });

  const ForcingsQuery = TimeWindowQuery.extend({ variables: z.string().optional() });
  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/forcings', summary: 'Forcings in a time window (JSON or CSV); variables=a,b to choose', tag: 'archive', role: 'read', params: GaugeParams, query: ForcingsQuery, response: z.object({ gaugeId: z.string(), times: z.array(z.string()), variables: z.array(Series) }), responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const q = req.query;
      const { window } = readWindow({ from: q.from, to: q.to });
      const units = await forcingUnits(db, gauge.id);
      const names = q.variables ? q.variables.split(',').map((s) => s.trim()) : [...units.keys()].sort();
      const csv = wantsCsv(req, q.format);
      return sendStream(reply, forcingsStream(db, gauge.id, window, names, units, csv), csv ? `${gauge.id}-forcings.csv` : undefined);
    },
  );
}
