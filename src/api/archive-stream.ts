// Archive reads as streams: rows come from the store in pages (store/archive-repo.ts page*), and
// the response is written a chunk at a time, each chunk made only when the client has taken the one
// before (Readable.from pulls from the generator), so no read holds the event loop for long, however
// large the archive. Shapes with the time axis first (JSON times before values, CSV with one column
// per member or variable) keep the read compactly (numbers in plain arrays) until it is written.
// The bytes are the same as the whole-body responses these replaced.
import { Readable } from 'node:stream';
import type { FastifyReply } from 'fastify';
import { formatDurationSeconds } from '../core/iso-duration.ts';
import { isoUtc } from '../services/series-input.ts';
import { pageForcing, pageObservations, pageReforecasts, pageSimulations, type Window } from '../store/archive-repo.ts';
import type { Db } from '../store/db.ts';
import { csvCell } from './csv.ts';

/** Values per written chunk: a few milliseconds of formatting. */
const CHUNK = 4096;

export function sendStream(reply: FastifyReply, chunks: AsyncGenerator<string>, csvFilename?: string): FastifyReply {
  if (csvFilename) reply.type('text/csv; charset=utf-8').header('content-disposition', `inline; filename="${csvFilename}"`);
  else reply.type('application/json; charset=utf-8');
  return reply.send(Readable.from(chunks, { objectMode: false }));
}

const num = (v: number) => (Number.isNaN(v) ? 'null' : String(v));
const cell = (v: number) => (Number.isNaN(v) ? '' : String(v));

/** A JSON array of n items, in chunks. */
function* jsonArray(n: number, item: (i: number) => string): Generator<string> {
  if (n === 0) {
    yield '[]';
    return;
  }
  for (let from = 0; from < n; from += CHUNK) {
    const to = Math.min(n, from + CHUNK);
    let s = from === 0 ? '[' : ',';
    for (let i = from; i < to; i++) s += (i > from ? ',' : '') + item(i);
    yield to === n ? s + ']' : s;
  }
}

/** One series read off the store: times (epoch ms, ascending) and values (NaN = null). */
interface Series {
  t: number[];
  v: number[];
}

/** The sorted union of times gathered page by page (a whole archive at once would hold the event loop). */
const sortedTimes = (set: Set<number>) => Float64Array.from(set).sort();

/** A series' values on the union axis `times` (null where it has none), by walking both in order. */
function* onAxis(s: Series, times: Float64Array, item: (v: number) => string): Generator<string> {
  let p = 0;
  yield* jsonArray(times.length, (i) => {
    if (p < s.t.length && s.t[p] === times[i]) return item(s.v[p++]);
    return item(NaN);
  });
}

/** CSV rows `time,v1,v2,…` of series on a union axis, a chunk at a time. */
function* csvRows(series: Series[], times: Float64Array): Generator<string> {
  const ptr = new Array<number>(series.length).fill(0);
  const rowsPerChunk = Math.max(1, Math.floor(CHUNK / (series.length + 1)));
  for (let from = 0; from < times.length; from += rowsPerChunk) {
    const to = Math.min(times.length, from + rowsPerChunk);
    let s = '';
    for (let i = from; i < to; i++) {
      s += isoUtc(times[i]);
      for (let k = 0; k < series.length; k++) {
        const m = series[k];
        s += ',';
        if (ptr[k] < m.t.length && m.t[ptr[k]] === times[i]) s += cell(m.v[ptr[k]++]);
      }
      s += '\n';
    }
    yield s;
  }
}

export async function* observationsStream(db: Db, gaugeId: string, window: Window, csv: boolean): AsyncGenerator<string> {
  const pages = db.reading((q) => pageObservations(q, gaugeId, window));
  if (csv) {
    yield 'time,flow (m3/s),quality\n';
    for await (const rows of pages) {
      let s = '';
      for (const r of rows) s += `${isoUtc(r.t)},${r.value ?? ''},${csvCell(r.quality)}\n`;
      yield s;
    }
    return;
  }
  const t: number[] = [];
  const v: number[] = [];
  const quality: (string | null)[] = [];
  for await (const rows of pages) {
    for (const r of rows) {
      t.push(r.t);
      v.push(r.value ?? NaN);
      quality.push(r.quality);
    }
  }
  yield `{"gaugeId":${JSON.stringify(gaugeId)},"unit":"m3/s","times":`;
  yield* jsonArray(t.length, (i) => `"${isoUtc(t[i])}"`);
  yield ',"values":';
  yield* jsonArray(v.length, (i) => num(v[i]));
  yield ',"quality":';
  yield* jsonArray(quality.length, (i) => JSON.stringify(quality[i]));
  yield '}';
}

export async function* simulationsStream(db: Db, gaugeId: string, window: Window, members: string[] | undefined, csv: boolean): AsyncGenerator<string> {
  // Members in the store's order, each with its own times.
  const list: (Series & { id: string })[] = [];
  const union = new Set<number>();
  for await (const rows of db.reading((q) => pageSimulations(q, gaugeId, window, members))) {
    for (const r of rows) {
      let m = list[list.length - 1];
      if (!m || m.id !== r.member_id) list.push((m = { id: r.member_id, t: [], v: [] }));
      m.t.push(r.t);
      m.v.push(r.value ?? NaN);
      union.add(r.t);
    }
  }
  const times = sortedTimes(union);
  if (csv) {
    yield [`time`, ...list.map((m) => `${m.id} (m3/s)`)].join(',') + '\n';
    yield* csvRows(list, times);
    return;
  }
  yield `{"gaugeId":${JSON.stringify(gaugeId)},"unit":"m3/s","times":`;
  yield* jsonArray(times.length, (i) => `"${isoUtc(times[i])}"`);
  yield ',"members":[';
  for (const [k, m] of list.entries()) {
    yield `${k ? ',' : ''}{"id":${JSON.stringify(m.id)},"values":`;
    yield* onAxis(m, times, num);
    yield '}';
  }
  yield ']}';
}

/**
 * Forcings as columns in the order asked (`names`, unknown names left out). A name asked twice
 * gives two columns of which only the last holds the values, as the whole-body response did.
 */
export async function* forcingsStream(db: Db, gaugeId: string, window: Window, names: string[], units: Map<string, string>, csv: boolean): AsyncGenerator<string> {
  const known = [...new Set(names.filter((n) => units.has(n)))];
  const read = new Map<string, Series>();
  const union = new Set<number>();
  for await (const [name, rows] of db.reading(async function* (q) {
    for (const name of known) for await (const rows of pageForcing(q, gaugeId, window, name)) yield [name, rows] as const;
  })) {
    let s = read.get(name);
    if (!s) read.set(name, (s = { t: [], v: [] }));
    for (const r of rows) {
      s.t.push(r.t);
      s.v.push(r.value ?? NaN);
      union.add(r.t);
    }
  }
  const times = sortedTimes(union);
  const empty: Series = { t: [], v: [] };
  const columns = names
    .map((name, k) => ({ name, last: names.lastIndexOf(name) === k }))
    .filter((c) => units.has(c.name))
    .map((c) => ({ name: c.name, unit: units.get(c.name)!, series: c.last ? (read.get(c.name) ?? empty) : empty }));
  if (csv) {
    yield ['time', ...columns.map((c) => `${c.name} (${c.unit})`)].join(',') + '\n';
    yield* csvRows(columns.map((c) => c.series), times);
    return;
  }
  yield `{"gaugeId":${JSON.stringify(gaugeId)},"times":`;
  yield* jsonArray(times.length, (i) => `"${isoUtc(times[i])}"`);
  yield ',"variables":[';
  for (const [k, c] of columns.entries()) {
    yield `${k ? ',' : ''}{"name":${JSON.stringify(c.name)},"unit":${JSON.stringify(c.unit)},"values":`;
    yield* onAxis(c.series, times, num);
    yield '}';
  }
  yield ']}';
}

/** Past runs, written as they are read: runs → members → values by lead (null where a lead is missing). */
export async function* reforecastsStream(db: Db, gauge: { id: string; stepSeconds: number; timeStep: string }, window: Window, csv: boolean): AsyncGenerator<string> {
  const pages = db.reading((q) => pageReforecasts(q, gauge.id, window));
  let lastT = NaN;
  let lastIso = '';
  const issue = (t: number) => {
    if (t !== lastT) {
      lastT = t;
      lastIso = isoUtc(t);
    }
    return lastIso;
  };
  if (csv) {
    yield 'issue_time,member,lead_time,flow (m3/s)\n';
    for await (const rows of pages) {
      let s = '';
      for (const r of rows) s += `${issue(r.t)},${r.member_id},${formatDurationSeconds(r.lead * gauge.stepSeconds)},${r.value ?? ''}\n`;
      yield s;
    }
    return;
  }
  yield `{"gaugeId":${JSON.stringify(gauge.id)},"unit":"m3/s","timeStep":${JSON.stringify(gauge.timeStep)},"runs":[`;
  let runT = NaN;
  let member: string | null = null;
  let lead = 0;
  let first = true;
  for await (const rows of pages) {
    let s = '';
    for (const r of rows) {
      if (r.t !== runT) {
        if (!first) s += ']}]}';
        s += `${first ? '' : ','}{"issueTime":"${issue(r.t)}","members":[`;
        first = false;
        runT = r.t;
        member = null;
      }
      if (r.member_id !== member) {
        if (member !== null) s += ']},';
        s += `{"id":${JSON.stringify(r.member_id)},"values":[`;
        member = r.member_id;
        lead = 0;
      }
      while (lead < r.lead - 1) s += lead++ ? ',null' : 'null';
      s += (lead++ ? ',' : '') + (r.value === null ? 'null' : String(r.value));
    }
    yield s;
  }
  yield first ? ']}' : ']}]}]}';
}
