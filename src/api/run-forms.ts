// The CSV and NetCDF forms of a posted run, read into the JSON body they stand for. Each keeps a
// map back to where a value came from, so a problem found later in the JSON shape is named by
// its CSV line or NetCDF variable and index.
import { parseDurationSeconds, formatDurationSeconds } from '../core/iso-duration.ts';
import { ErrorList } from '../services/problem.ts';
import { csvNumber, knownForcingUnits } from '../services/series-input.ts';
import { parseCsv, splitHeader } from './csv.ts';
import { readNetcdf, type NetcdfDataset, type NetcdfVariable } from './netcdf-read.ts';

export interface DecodedRun {
  /** The run as the JSON body it stands for (values unchecked). */
  json: Record<string, unknown>;
  /** Names the CSV line or NetCDF variable behind a path of the JSON shape (`body.members[2].values[7]`). */
  where: (path: string) => string;
}

/** Fields that come from the query string for CSV and NetCDF bodies. */
const QUERY_FIELDS = new Set(['source', 'quantiles', 'trajectories', 'seed', 'seasonalWindowDays', 'issueObservation']);

function queryPath(path: string): string | null {
  const m = /^body\.(\w+)/.exec(path);
  return m && QUERY_FIELDS.has(m[1]) ? `query.${m[1]}` : null;
}

const FORCING_NAME = /^[a-z][a-z0-9_]{0,47}$/;

/** Whether a forcing's declared unit is the one the service stores it in. */
function forcingUnitProblem(name: string, unit: string | null): string | null {
  const known = knownForcingUnits[name];
  if (!known) return unit ? null : `forcing ${name} needs its unit in brackets, e.g. ${name} (mm)`;
  if (unit === null || !known.aliases.includes(unit)) return `forcing ${name} must be in ${known.unit}, got ${unit === null ? 'no unit' : JSON.stringify(unit)}`;
  return null;
}

/**
 * CSV long form, one value a line, one run per body: `issue_time,member,lead_time,flow (m3/s)`,
 * optionally followed by forcing columns such as `precipitation (mm),air_temperature (degC)` whose
 * values are shared by all members (one per lead time). Lead times run P1D, P2D, … on the gauge's
 * step, in order per member. The flow unit may be any the service takes (converted to m3/s).
 */
export function runFromCsv(text: string, stepSeconds: number): DecodedRun {
  const errors = new ErrorList();
  const table = parseCsv(text, errors);
  errors.throwIfAny();
  const [a, b, c, d, ...rest] = table.header;
  const flow = splitHeader(d ?? '');
  if (a !== 'issue_time' || b !== 'member' || c !== 'lead_time' || flow.name !== 'flow') {
    errors.add('line 1', 'the header must begin issue_time,member,lead_time,flow (m3/s), optionally followed by forcing columns such as precipitation (mm)');
  } else if (flow.unit === null) errors.add(`line 1, column ${d}`, 'give the flow unit in brackets, e.g. flow (m3/s)');
  const forcingColumns = rest.map((cell, j) => ({ ...splitHeader(cell), header: cell, col: 4 + j }));
  for (const f of forcingColumns) {
    if (!FORCING_NAME.test(f.name)) errors.add(`line 1, column ${f.header}`, 'a forcing name is lowercase letters, digits and _ (e.g. precipitation)');
    else {
      const problem = forcingUnitProblem(f.name, f.unit);
      if (problem) errors.add(`line 1, column ${f.header}`, problem);
    }
  }
  errors.throwIfAny();

  let issue: string | null = null;
  let issueLine = 0;
  const members = new Map<string, { values: unknown[]; lines: number[] }>();
  const forcings = forcingColumns.map(() => ({ values: [] as unknown[], lines: [] as number[] }));
  for (const row of table.rows) {
    const [issueCell, member, leadText, value] = row.cells.map((s) => s.trim());
    if (issue === null) {
      issue = issueCell;
      issueLine = row.line;
    } else if (issueCell !== issue) {
      errors.add(`line ${row.line}, column issue_time`, `one run per body: ${JSON.stringify(issueCell)} differs from line ${issueLine}'s ${JSON.stringify(issue)}`);
    }
    let m = members.get(member);
    if (!m) members.set(member, (m = { values: [], lines: [] }));
    const seconds = parseDurationSeconds(leadText);
    if (seconds === null || seconds % stepSeconds !== 0 || seconds <= 0) {
      errors.add(`line ${row.line}, column lead_time`, `${JSON.stringify(leadText)} is not an ISO 8601 duration that is a whole positive number of gauge steps`);
      continue;
    }
    const lead = seconds / stepSeconds;
    if (lead !== m.values.length + 1) {
      errors.add(`line ${row.line}, column lead_time`, `expected lead time ${formatDurationSeconds((m.values.length + 1) * stepSeconds)} next for member ${member}; lead times run in order without gaps or repeats`);
      continue;
    }
    m.values.push(csvNumber(value));
    m.lines.push(row.line);
    forcingColumns.forEach((f, j) => {
      const v = csvNumber(row.cells[f.col]);
      const series = forcings[j];
      if (series.values.length < lead) {
        series.values.push(v);
        series.lines.push(row.line);
      } else if (series.values[lead - 1] !== v) {
        errors.add(`line ${row.line}, column ${f.header}`, `${JSON.stringify(v)} differs from line ${series.lines[lead - 1]}'s ${JSON.stringify(series.values[lead - 1])} at the same lead time; forcings are shared by all members`);
      }
    });
    if (errors.full) break;
  }
  if (!table.rows.length) errors.add('line 2', 'no data rows');
  errors.throwIfAny();

  const order = [...members.entries()];
  const json: Record<string, unknown> = {
    issueTime: issue,
    unit: flow.unit,
    warmupSteps: 0,
    members: order.map(([id, m]) => ({ id, values: m.values })),
    ...(forcingColumns.length ? { forcings: Object.fromEntries(forcingColumns.map((f, j) => [f.name, forcings[j].values])) } : {}),
  };
  const where = (path: string): string => {
    const fromQuery = queryPath(path);
    if (fromQuery) return fromQuery;
    let x = /^body\.members\[(\d+)\]\.values\[(\d+)\]/.exec(path);
    if (x) return `line ${order[+x[1]]?.[1].lines[+x[2]] ?? '?'}, column ${d}`;
    x = /^body\.members\[(\d+)\]/.exec(path);
    if (x) return `line ${order[+x[1]]?.[1].lines[0] ?? '?'}, column member`;
    x = /^body\.forcings\.(\w+)\[(\d+)\]/.exec(path);
    if (x) {
      const j = forcingColumns.findIndex((f) => f.name === x![1]);
      return j >= 0 ? `line ${forcings[j].lines[+x[2]] ?? '?'}, column ${forcingColumns[j].header}` : path;
    }
    x = /^body\.forcings\.(\w+)/.exec(path);
    if (x) return `line 1, column ${forcingColumns.find((f) => f.name === x![1])?.header ?? x[1]}`;
    if (path.startsWith('body.issueTime')) return `line ${issueLine}, column issue_time`;
    if (path.startsWith('body.unit')) return `line 1, column ${d}`;
    return path;
  };
  return { json, where };
}

/** Seconds per CF time unit (UDUNITS spellings the convention uses). */
const TIME_UNITS: Record<string, number> = {
  second: 1, seconds: 1, sec: 1, secs: 1, s: 1,
  minute: 60, minutes: 60, min: 60, mins: 60,
  hour: 3600, hours: 3600, hr: 3600, hrs: 3600, h: 3600,
  day: 86400, days: 86400, d: 86400,
};

/** A CF time `units` attribute (`days since 2024-05-01 00:00:00`) as seconds per unit and the epoch in ms; null if not one. */
export function cfTimeUnits(units: string): { seconds: number; epochMs: number } | null {
  const m = /^\s*(\w+)\s+since\s+(\d{1,4})-(\d{1,2})-(\d{1,2})(?:[ T](\d{1,2}):(\d{1,2})(?::(\d{1,2}(?:\.\d+)?))?)?\s*(Z|UTC|[+-]\d{1,2}(?::?\d{2})?)?\s*$/i.exec(units);
  if (!m) return null;
  const seconds = TIME_UNITS[m[1].toLowerCase()];
  if (!seconds) return null;
  let epochMs = Date.UTC(+m[2], +m[3] - 1, +m[4], +(m[5] ?? 0), +(m[6] ?? 0)) + Math.round(Number(m[7] ?? 0) * 1000);
  const zone = m[8];
  if (zone && zone !== 'Z' && zone.toUpperCase() !== 'UTC') {
    const z = /^([+-])(\d{1,2}):?(\d{2})?$/.exec(zone)!;
    epochMs -= (z[1] === '-' ? -1 : 1) * (+z[2] * 60 + +(z[3] ?? 0)) * 60_000;
  }
  return Number.isFinite(epochMs) ? { seconds, epochMs } : null;
}

const iso = (ms: number | undefined) => (ms !== undefined && Number.isFinite(ms) ? new Date(ms).toISOString().replace('.000Z', 'Z') : 'outside the file');

/** A variable's values with its _FillValue and missing_value as null. */
function withMissing(v: NetcdfVariable, values: (number | string)[]): (number | string | null)[] {
  const fills = [v.attributes._FillValue, v.attributes.missing_value].flat().filter((x): x is number => typeof x === 'number');
  return values.map((x) => (typeof x === 'number' && (Number.isNaN(x) || fills.includes(x)) ? null : x));
}

/** CF forcing units the service reads: its own, and the CF spellings that mean the same. */
const FORCING_CF_UNITS: Record<string, Record<string, (x: number) => number>> = {
  precipitation: { mm: (x) => x, 'kg m-2': (x) => x },
  potential_evaporation: { mm: (x) => x, 'kg m-2': (x) => x },
  air_temperature: { degC: (x) => x, Celsius: (x) => x, degree_Celsius: (x) => x, K: (x) => x - 273.15 },
};

/**
 * CF-convention NetCDF (classic through netcdfjs, NetCDF-4/HDF5 through h5wasm): a flow variable
 * with dimensions (realization, time) and a flow `units` attribute; `time` a CF time coordinate
 * of the valid times; the issue time a scalar `forecast_reference_time` (CF standard name) in CF
 * time units; member names in a `member` string variable along realization (else the realization
 * coordinate's values). Times at or before the issue time are the warm-up; later ones must be the
 * lead times 1 … H on the gauge's step. Optional forcings: variables over time named like the
 * service's forcings (precipitation in mm or kg m-2, air_temperature in degC or K).
 */
export async function runFromNetcdf(bytes: Uint8Array, stepSeconds: number, variable?: string): Promise<DecodedRun> {
  const errors = new ErrorList();
  let ds: NetcdfDataset;
  try {
    ds = await readNetcdf(bytes);
  } catch (err) {
    errors.add('body', `not a NetCDF file the service can read: ${(err as Error).message}`);
    errors.throwIfAny();
    throw err;
  }
  const find = (name: string) => ds.variables.find((v) => v.name === name) ?? null;
  const flows = ds.variables.filter((v) => v.dimensions.length === 2 && v.dimensions[0] === 'realization' && v.dimensions[1] === 'time');
  let flow: NetcdfVariable | null = null;
  if (variable) {
    flow = find(variable);
    if (!flow) errors.add('query.variable', `the file has no variable ${variable}`);
    else if (flow.dimensions.join(',') !== 'realization,time') errors.add(`variable ${variable}`, `has dimensions (${flow.dimensions.join(', ')}); a run's flow has (realization, time)`);
  } else if (flows.length === 1) flow = flows[0];
  else if (flows.length === 0) errors.add('body', 'no variable with dimensions (realization, time): a run holds its flow as flow(realization, time) with a units attribute');
  else errors.add('query.variable', `several variables have dimensions (realization, time) (${flows.map((v) => v.name).join(', ')}); name the flow with ?variable=`);
  const time = find('time');
  const timeUnits = time ? cfTimeUnits(String(time.attributes.units ?? '')) : null;
  if (!time) errors.add('body', 'no time coordinate variable');
  else if (!timeUnits) errors.add('variable time', `units ${JSON.stringify(time.attributes.units ?? null)} is not a CF time unit such as "days since 2024-05-01 00:00:00"`);
  const calendar = String(time?.attributes.calendar ?? 'standard');
  if (time && !['standard', 'gregorian', 'proleptic_gregorian'].includes(calendar)) errors.add('variable time', `calendar ${calendar} is not read; use standard`);
  const reference = ds.variables.find((v) => v.name === 'forecast_reference_time' || v.attributes.standard_name === 'forecast_reference_time') ?? null;
  const referenceUnits = reference ? cfTimeUnits(String(reference.attributes.units ?? '')) : null;
  if (!reference) errors.add('body', 'no forecast_reference_time variable: the issue time is a scalar forecast_reference_time in CF time units');
  else if (!referenceUnits) errors.add(`variable ${reference.name}`, `units ${JSON.stringify(reference.attributes.units ?? null)} is not a CF time unit`);
  errors.throwIfAny();

  const toMs = (u: { seconds: number; epochMs: number }, x: number) => u.epochMs + Math.round(x * u.seconds * 1000);
  const refValue = Number(ds.read(reference!)[0]);
  const issueMs = toMs(referenceUnits!, refValue);
  const times = ds.read(time!).map((x) => toMs(timeUnits!, Number(x)));
  const stepMs = stepSeconds * 1000;
  const warmupSteps = times.filter((t) => t <= issueMs).length;
  times.forEach((t, k) => {
    const expected = issueMs + (k - warmupSteps + 1) * stepMs;
    if (t !== expected) errors.add(`variable time[${k}]`, `${iso(t)} should be ${iso(expected)}: times run on the gauge's step of ${stepSeconds} s, the warm-up up to the issue time ${iso(issueMs)} and then each lead time`);
  });
  const nTime = times.length;
  const nReal = ds.dimensions.realization ?? 0;
  const names = find('member') ?? find('member_id');
  const realization = find('realization');
  const ids = names ? ds.read(names).map((x) => String(x).trim()) : realization ? ds.read(realization).map((x) => String(x)) : Array.from({ length: nReal }, (_, i) => String(i + 1));
  if (ids.length !== nReal) errors.add(`variable ${names?.name ?? 'realization'}`, `has ${ids.length} values for ${nReal} realizations`);
  const values = withMissing(flow!, ds.read(flow!));
  const forcings: Record<string, (number | string | null)[]> = {};
  for (const [name, units] of Object.entries(FORCING_CF_UNITS)) {
    const v = find(name);
    if (!v) continue;
    if (v.dimensions.join(',') !== 'time') {
      errors.add(`variable ${name}`, `has dimensions (${v.dimensions.join(', ')}); a forcing has (time), shared by all members`);
      continue;
    }
    const unit = String(v.attributes.units ?? '');
    const convert = units[unit];
    if (!convert) {
      errors.add(`variable ${name}`, `units ${JSON.stringify(unit)} is not one of ${Object.keys(units).join(', ')}`);
      continue;
    }
    forcings[name] = withMissing(v, ds.read(v)).map((x) => (typeof x === 'number' ? convert(x) : x));
  }
  errors.throwIfAny();

  const json: Record<string, unknown> = {
    issueTime: iso(issueMs),
    unit: String(flow!.attributes.units ?? ''),
    warmupSteps,
    members: ids.map((id, i) => ({ id, values: values.slice(i * nTime, (i + 1) * nTime) })),
    ...(Object.keys(forcings).length ? { forcings } : {}),
  };
  const where = (path: string): string => {
    const fromQuery = queryPath(path);
    if (fromQuery) return fromQuery;
    let x = /^body\.members\[(\d+)\]\.values\[(\d+)\]/.exec(path);
    if (x) return `variable ${flow!.name}[realization ${x[1]} (member ${ids[+x[1]]}), time ${x[2]} (${iso(times[+x[2]])})]`;
    x = /^body\.members\[(\d+)\]\.id/.exec(path);
    if (x) return `variable ${names?.name ?? 'realization'}[${x[1]}]`;
    x = /^body\.members\[(\d+)\]/.exec(path);
    if (x) return `variable ${flow!.name}[realization ${x[1]} (member ${ids[+x[1]]})]`;
    x = /^body\.forcings\.(\w+)\[(\d+)\]/.exec(path);
    if (x) return `variable ${x[1]}[time ${x[2]} (${iso(times[+x[2]])})]`;
    x = /^body\.forcings\.(\w+)/.exec(path);
    if (x) return `variable ${x[1]}`;
    if (path.startsWith('body.unit')) return `variable ${flow!.name}, attribute units`;
    if (path.startsWith('body.issueTime')) return `variable ${reference!.name}`;
    if (path.startsWith('body.warmupSteps')) return 'variable time';
    return path;
  };
  return { json, where };
}
