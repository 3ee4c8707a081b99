// The one way archive data comes in (observations, forcings, simulations, reforecasts): a batch
// is sent as JSON or CSV, decoded to the resource's batch, checked against the gauge (locked for
// the write) and upserted in one transaction; every refusal names the field or the CSV line and
// column, and a refused batch writes nothing. Most archive data is a time axis with columns of
// values on it, so that shape has one codec here (readTimeColumns) that both formats decode to.
import type { FastifyInstance } from 'fastify';
import type { z } from 'zod';
import { ErrorList } from '../services/problem.ts';
import { csvNumber } from '../services/series-input.ts';
import type { Queryable } from '../store/db.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { bodyFormat, GaugeParams, requireGauge } from './archive-common.ts';
import { addRoute, type Services } from './context.ts';
import { parseCsv, splitHeader, type CsvTable } from './csv.ts';
import { parseWith } from './validate.ts';

/** A time axis with named columns of values on it, and where each part was in the request. */
export interface TimeColumns {
  times: unknown[];
  columns: { name: string; unit: string | null; values: unknown[] }[];
  timeWhere: (i: number) => string;
  valueWhere: (column: number, i: number) => string;
  /** Where a column's name and unit were given. */
  columnWhere: (column: number) => string;
}

/** JSON side of the codec: a `times` array and columns that each hold one value per time (checked here). */
export function timeColumnsFromJson(
  times: unknown[],
  columns: { name: string; unit: string | null; values: unknown[] }[],
  paths: { values: (k: number) => string; name: (k: number) => string; unit: (k: number) => string; duplicate: (name: string) => string },
  errors: ErrorList,
): TimeColumns & { unitWhere: (k: number) => string } {
  columns.forEach((c, k) => {
    if (c.values.length !== times.length) errors.add(paths.values(k), `has ${c.values.length} entries but body.times has ${times.length}`);
    if (columns.findIndex((o) => o.name === c.name) !== k) errors.add(paths.name(k), paths.duplicate(c.name));
  });
  return {
    times,
    columns,
    timeWhere: (i) => `body.times[${i}]`,
    valueWhere: (k, i) => `${paths.values(k)}[${i}]`,
    columnWhere: paths.name,
    unitWhere: paths.unit,
  };
}

/**
 * CSV side of the codec: `time,<name> (<unit>),<name> (<unit>),…`, one row per time. Values are
 * numbers (empty = missing) unless `textColumns` names the column. `noColumns` says what to write
 * when only the time column is there.
 */
export function timeColumnsFromCsv(text: string, errors: ErrorList, options: { noColumns: string; duplicate: (name: string) => string; textColumns?: string[] }): TimeColumns & { headers: string[] } {
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [timeCol, ...valueCols] = table.header;
  if (timeCol !== 'time') errors.add('line 1', `the first column must be "time", found ${JSON.stringify(timeCol)}`);
  if (!valueCols.length) errors.add('line 1', options.noColumns);
  const columns = valueCols.map((cell, k) => {
    const { name, unit } = splitHeader(cell);
    if (valueCols.findIndex((c) => splitHeader(c).name === name) !== k) errors.add(`line 1, column ${name}`, options.duplicate(name));
    return { name, unit, values: new Array<unknown>(table.rows.length) };
  });
  const { times } = fillColumns(table, columns, options.textColumns ?? []);
  if (!table.rows.length) errors.add('line 2', 'no data rows');
  return {
    headers: valueCols,
    times,
    columns,
    timeWhere: (i) => `line ${table.rows[i].line}, column time`,
    valueWhere: (k, i) => `line ${table.rows[i].line}, column ${columns[k].name}`,
    columnWhere: (k) => `line 1, column ${columns[k].name}`,
  };
}

/**
 * Fills the value columns row by row (one pass over the table, cells read where they lie) and
 * answers the time column. Cells are numbers by csvNumber, or trimmed text (empty = null) in a
 * text column.
 */
function fillColumns(table: CsvTable, columns: { name: string; values: unknown[] }[], textNames: string[]): { times: string[]; textColumns: boolean[] } {
  const rows = table.rows;
  const times = new Array<string>(rows.length);
  const textColumns = columns.map((c) => textNames.includes(c.name));
  const nc = columns.length;
  for (let i = 0; i < rows.length; i++) {
    const cells = rows[i].cells;
    times[i] = cells[0].trim();
    for (let k = 0; k < nc; k++) columns[k].values[i] = textColumns[k] ? cells[k + 1].trim() || null : csvNumber(cells[k + 1]);
  }
  return { times, textColumns };
}

export interface IngestResult {
  gaugeId: string;
  received: number;
  written: number;
}

/**
 * Registers POST /gauges/:id/<resource>: JSON bodies are parsed with `body` once (paths `body.…`),
 * CSV bodies handed over as text. In one transaction with the gauge locked: `decode` makes the
 * resource's batch (it may read the gauge, e.g. its step), `check` checks it against the gauge and
 * the store, and only when no error was found `store` upserts it.
 */
export function addIngestRoute<S extends z.ZodType, B, C>(
  app: FastifyInstance,
  services: Services,
  route: {
    resource: string;
    summary: string;
    body: S;
    decode: (input: { json: z.output<S> } | { csv: string }, gauge: Gauge, errors: ErrorList) => B;
    check: (tx: Queryable, gauge: Gauge, batch: B, errors: ErrorList) => Promise<C> | C;
    store: (tx: Queryable, gauge: Gauge, checked: C) => Promise<{ received: number; written: number }>;
    /** After the commit, off the request (e.g. refreshing the drift status). */
    after?: (result: IngestResult, log: { warn: (o: object, msg: string) => void }) => void;
  },
): void {
  const { db } = services;
  addRoute(
    app,
    services,
    { method: 'POST', url: `/gauges/:id/${route.resource}`, summary: route.summary, tag: 'archive', role: 'ingest', params: GaugeParams, body: route.body, bodyTypes: ['application/json', 'text/csv'], bodyDecodedByHandler: true },
    async (req) => {
      const errors = new ErrorList();
      const input = bodyFormat(req) === 'csv' ? { csv: req.body as string } : { json: parseWith(route.body, req.body, 'body') };
      const result = await db.transaction(async (tx) => {
        const gauge = await requireGauge(tx, req.params, true);
        const batch = route.decode(input, gauge, errors);
        errors.throwIfAny();
        const checked = await route.check(tx, gauge, batch, errors);
        errors.throwIfAny();
        return { gaugeId: gauge.id, ...(await route.store(tx, gauge, checked)) };
      });
      route.after?.(result, req.log);
      return result;
    },
  );
}
