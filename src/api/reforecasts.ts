import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { formatDurationSeconds, parseDurationSeconds } from '../core/iso-duration.ts';
import { forcingUnits, listMembers, upsertReforecastForcings, upsertReforecasts } from '../store/archive-repo.ts';
import { reforecastsStream, sendStream } from './archive-stream.ts';
import { GaugeParams, readWindow, requireGauge, wantsCsv } from './archive-common.ts';
import { addIngestRoute } from './archive-ingest.ts';
import { addRoute, type Services } from './context.ts';
import { parseCsv, splitHeader } from './csv.ts';
import { ErrorList } from '../services/problem.ts';
import { MemberId, TimeWindowQuery } from './schemas.ts';
import { flowLimit, forcingLimit } from '../services/plausible-values.ts';
import { checkFlowUnit, checkTimes, checkValues, csvNumber } from '../services/series-input.ts';

const ReforecastsBody = z.strictObject({
  unit: z.string(),
  runs: z
    .array(
      z.strictObject({
        issueTime: z.string(),
        members: z.array(z.strictObject({ id: MemberId, values: z.array(z.unknown()).min(1) })).min(1),
        /** Forecast forcings the run was driven by, one value per lead time (optional, JSON only). */
        forcings: z.record(z.string().regex(/^[a-z][a-z0-9_]{0,47}$/), z.array(z.unknown())).optional(),
      }),
    )
    .min(1),
});

interface Run {
  issueTime: unknown;
  issueWhere: string;
  members: { id: string; idWhere: string; values: unknown[]; valueWhere: (lead: number) => string }[];
  forcings: { name: string; values: unknown[]; where: string }[];
}

function fromJson(b: z.output<typeof ReforecastsBody>, errors: ErrorList): Run[] {
  checkFlowUnit(b.unit, 'body.unit', errors);
  const runs = b.runs.map((run, r) => {
    const n = run.members[0].values.length;
    run.members.forEach((m, k) => {
      if (m.values.length !== n) errors.add(`body.runs[${r}].members[${k}].values`, `has ${m.values.length} lead times but members[0] has ${n}`);
      if (run.members.findIndex((o) => o.id === m.id) !== k) errors.add(`body.runs[${r}].members[${k}].id`, `member ${m.id} appears twice`);
    });
    for (const [name, values] of Object.entries(run.forcings ?? {})) {
      if (values.length !== n) errors.add(`body.runs[${r}].forcings.${name}`, `has ${values.length} values; the run has ${n} lead times`);
    }
    return {
      issueTime: run.issueTime,
      issueWhere: `body.runs[${r}].issueTime`,
      members: run.members.map((m, k) => ({ id: m.id, idWhere: `body.runs[${r}].members[${k}].id`, values: m.values, valueWhere: (l: number) => `body.runs[${r}].members[${k}].values[${l}]` })),
      forcings: Object.entries(run.forcings ?? {}).map(([name, values]) => ({ name, values, where: `body.runs[${r}].forcings.${name}` })),
    };
  });
  errors.throwIfAny();
  return runs;
}

/** CSV, one value a line: `issue_time,member,lead_time,flow (m3/s)`; lead times run P1D, P2D, ... on the gauge's step. */
function fromCsv(text: string, stepSeconds: number, errors: ErrorList): Run[] {
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [a, b, c, d, ...rest] = table.header;
  const flow = splitHeader(d ?? '');
  if (a !== 'issue_time' || b !== 'member' || c !== 'lead_time' || flow.name !== 'flow' || rest.length) {
    errors.add('line 1', 'the header must be: issue_time,member,lead_time,flow (m3/s)');
  } else checkFlowUnit(flow.unit, 'line 1, column flow', errors);
  errors.throwIfAny();
  const runs = new Map<string, Run>();
  const leadsSeen = new Map<string, { values: unknown[]; lines: number[] }>();
  for (const row of table.rows) {
    const [issue, member, leadText, value] = row.cells.map((s) => s.trim());
    if (!MemberId.safeParse(member).success) errors.add(`line ${row.line}, column member`, `bad member id ${JSON.stringify(member)}`);
    const leadSeconds = parseDurationSeconds(leadText);
    if (leadSeconds === null || leadSeconds % stepSeconds !== 0) {
      errors.add(`line ${row.line}, column lead_time`, `${JSON.stringify(leadText)} is not an ISO 8601 duration that is a whole number of gauge steps`);
      continue;
    }
    const lead = leadSeconds / stepSeconds;
    let run = runs.get(issue);
    if (!run) runs.set(issue, (run = { issueTime: issue, issueWhere: `line ${row.line}, column issue_time`, members: [], forcings: [] }));
    const key = `${issue}\u0000${member}`;
    let seen = leadsSeen.get(key);
    if (!seen) {
      seen = { values: [], lines: [] };
      leadsSeen.set(key, seen);
      const s = seen;
      run.members.push({ id: member, idWhere: `line ${row.line}, column member`, values: s.values, valueWhere: (l) => `line ${s.lines[l]}, column flow` });
    }
    if (lead !== seen.values.length + 1) {
      errors.add(`line ${row.line}, column lead_time`, `expected lead time ${formatDurationSeconds((seen.values.length + 1) * stepSeconds)} next for member ${member}; lead times must run in order without gaps or repeats`);
    }
    seen.values.push(csvNumber(value));
    seen.lines.push(row.line);
    if (errors.full) break;
  }
  for (const run of runs.values()) {
    const n = run.members[0].values.length;
    for (const m of run.members) {
      if (m.values.length !== n) errors.add(m.idWhere, `member ${m.id} has ${m.values.length} lead times at ${String(run.issueTime)}, the first member has ${n}`);
    }
  }
  if (!runs.size) errors.add('line 2', 'no data rows');
  errors.throwIfAny();
  return [...runs.values()];
}

export async function reforecastRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;

  addIngestRoute(app, services, {
    resource: 'reforecasts',
    summary: 'Add past forecast runs (upsert by issue time, member and lead time), optionally with the forecast forcings they were driven by; members must be known from simulations',
    body: ReforecastsBody,
    decode: (input, gauge, errors) => ('json' in input ? fromJson(input.json, errors) : fromCsv(input.csv, gauge.stepSeconds, errors)),
    check: async (tx, gauge, runs, errors) => {
      const known = new Set(await listMembers(tx, gauge.id));
      const variables = await forcingUnits(tx, gauge.id);
      const forcings = runs.map((run) =>
        run.forcings.map((f) => {
          if (!variables.has(f.name)) errors.add(f.where, `unknown forcing ${f.name}; forcings are declared by posting their archive first`);
          return { name: f.name, values: checkValues(f.values, forcingLimit(gauge, f.name, variables.get(f.name) ?? ''), (l) => `${f.where}[${l}]`, errors) };
        }),
      );
      const issueMs = checkTimes(runs.map((r) => r.issueTime), gauge.stepSeconds, (i) => runs[i].issueWhere, errors);
      const members = runs.map((run) =>
        run.members.map((m) => {
          if (!known.has(m.id)) errors.add(m.idWhere, `unknown member ${m.id}; members are declared by posting their simulations first`);
          return { id: m.id, values: checkValues(m.values, flowLimit(gauge), m.valueWhere, errors) };
        }),
      );
      return { issueMs, members, forcings };
    },
    store: async (tx, gauge, { issueMs, members, forcings }) => {
      // All runs of the batch in one upsert per table.
      const runMembers = members.flatMap((ms, r) => ms.map((m) => ({ issueMs: issueMs[r], memberId: m.id, values: m.values })));
      const runForcings = forcings.flatMap((fs, r) => fs.map((f) => ({ issueMs: issueMs[r], variable: f.name, values: f.values })));
      const received = [...runMembers, ...runForcings].reduce((n, s) => n + s.values.length, 0);
      const written = (await upsertReforecasts(tx, gauge.id, runMembers)) + (await upsertReforecastForcings(tx, gauge.id, runForcings));
      return { received, written };
    },
  });

  addRoute(
    app,
    services,
    { method: 'GET', url: '/gauges/:id/reforecasts', summary: 'Past forecast runs issued in a time window (JSON or CSV)', tag: 'archive', role: 'read', params: GaugeParams, query: TimeWindowQuery, response: z.object({ gaugeId: z.string(), unit: z.literal('m3/s'), timeStep: z.string(), runs: z.array(z.looseObject({ issueTime: z.string(), members: z.array(z.object({ id: z.string(), values: z.array(z.number().nullable()) })) })) }), responseTypes: ['application/json', 'text/csv'] },
    async (req, reply) => {
      const gauge = await requireGauge(db, req.params);
      const { window, format } = readWindow(req.query);
      const csv = wantsCsv(req, format);
      return sendStream(reply, reforecastsStream(db, gauge, window, csv), csv ? `${gauge.id}-reforecasts.csv` : undefined);
    },
  );
}
