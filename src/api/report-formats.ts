// How verification reports are written out: the main scores side by side as CSV or a fixed-width
// text table (stored-run verification and hindcasts share them), and the choice among JSON, CSV and text.
import type { FastifyReply } from 'fastify';
import type { UpdatingSplit } from '../core/correction/updating-split.ts';
import type { ComparisonReport, SizeStudyResult, SourceReport, StochasticAdvice, WarningReport } from '../core/verification/index.ts';
import { sendCaution, type Format } from './formats.ts';
import { warningText } from './warning-tables.ts';

export interface ScoreRow {
  score: string;
  unit: string;
  values: (number | string | null)[];
}

const pct = (l: number) => `${Math.round(l * 1000) / 10} %`;

/** The main scores side by side, in the order an operator reads them. */
export function scoreRows(report: ComparisonReport): ScoreRow[] {
  const sources: (SourceReport | null)[] = [report.raw, report.corrected, report.stochastic];
  const row = (score: string, unit: string, get: (s: SourceReport) => number | string | null | undefined): ScoreRow => ({
    score,
    unit,
    values: sources.map((s) => (s && s.n > 0 ? (get(s) ?? null) : null)),
  });
  const rows: ScoreRow[] = [
    row('cases', '', (s) => s.n),
    row('members or values per case', '', (s) => s.members.max),
    row('MAE of the median', 'm3/s', (s) => s.median.mae),
    row('RMSE of the median', 'm3/s', (s) => s.median.rmse),
    row('NSE of the median', '', (s) => s.median.nse),
    row('KGE of the median', '', (s) => s.median.kge),
    row('MAE of the mean', 'm3/s', (s) => s.mean.mae),
    row('RMSE of the mean', 'm3/s', (s) => s.mean.rmse),
    row('NSE of the mean', '', (s) => s.mean.nse),
    row('KGE of the mean', '', (s) => s.mean.kge),
    row('bias of the mean', 'm3/s', (s) => s.mean.bias),
    row('CRPS', 'm3/s', (s) => s.crps.crps),
    row('fair CRPS', 'm3/s', (s) => s.crps.fairCrps),
    row('CRPS skill vs raw', '', (s) => s.crps.skillVsRaw),
    row('fair CRPS skill vs raw', '', (s) => s.crps.fairSkillVsRaw),
    row('CRPS reliability (Hersbach)', 'm3/s', (s) => s.crps.hersbach.reliability),
    row('CRPS potential (Hersbach)', 'm3/s', (s) => s.crps.hersbach.potential),
    row('alpha index', '', (s) => s.alphaIndex),
    row('PIT mean', '', (s) => s.pit.mean),
    row('PIT variance ratio', '', (s) => s.pit.varianceRatio),
  ];
  for (const level of report.settings.levels) {
    const at = (s: SourceReport) => s.intervals.find((i) => i.level === level);
    rows.push(row(`coverage of the ${pct(level)} band`, '', (s) => at(s)?.coverage));
    rows.push(row(`PIT coverage ${pct(level)}`, '', (s) => at(s)?.pitCoverage));
    rows.push(row(`width of the ${pct(level)} band`, 'm3/s', (s) => at(s)?.meanWidth));
  }
  report.settings.thresholds.forEach((thr, t) => {
    rows.push(row(`Brier score, flow > ${thr}`, '', (s) => s.brier[t]?.brier));
    // Against the verified sample's own base rate; the warnings rows give it against the fitting period's.
    rows.push(row(`Brier skill vs the sample base rate, flow > ${thr}`, '', (s) => s.brier[t]?.skill));
  });
  rows.push(row('spread class', '', (s) => s.spread.class));
  return rows;
}

const csvField = (v: string) => (/[",\n\r]/.test(v) ? `"${v.replace(/"/g, '""')}"` : v);

/** A line of words that travels with a score table: what it is, the advice, a warning, the caution. */
export type ReportNote = [kind: 'about' | 'advice' | 'note' | 'warning' | 'caution', text: string];

/**
 * CSV of the scores; `extra` rows (the warnings) follow in the same columns, then one row per note
 * with its kind as the score and its words in the `note` column. No comment lines, so Python's csv
 * module and pandas read it as is.
 */
export function scoresCsv(report: ComparisonReport, notes: ReportNote[], extra: ScoreRow[] = []): string {
  const lines = ['score,unit,raw,corrected,stochastic,note'];
  for (const r of [...scoreRows(report), ...extra]) lines.push([r.score, r.unit, ...r.values.map((v) => (v === null ? '' : String(v))), ''].map(csvField).join(','));
  for (const [kind, text] of notes) lines.push([kind, '', '', '', '', text.replace(/\s*\n\s*/g, ' ')].map(csvField).join(','));
  return `${lines.join('\n')}\n`;
}

const fmt = (v: number | string | null): string => {
  if (v === null) return '–';
  if (typeof v === 'string') return v;
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a >= 1000 ? v.toFixed(0) : a >= 100 ? v.toFixed(1) : a >= 1 ? v.toFixed(3) : v.toFixed(4);
};

/** A fixed-width table: first column left-aligned, the others right-aligned. */
export function textTable(header: string[], rows: string[][]): string[] {
  const widths = header.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
  const line = (cells: string[]) => cells.map((c, i) => (i === 0 ? c.padEnd(widths[i]) : c.padStart(widths[i]))).join('  ').trimEnd();
  return [line(header), line(widths.map((w) => '-'.repeat(w))), ...rows.map(line)];
}

export function scoresText(title: string[], report: ComparisonReport, advice: StochasticAdvice, notes: string[]): string {
  const table = textTable(
    ['score', 'raw', 'corrected', 'stochastic'],
    scoreRows(report).map((r) => [`${r.score}${r.unit ? ` (${r.unit})` : ''}`, ...r.values.map(fmt)]),
  );
  return [
    ...title,
    '',
    ...table,
    '',
    `Stochastic stage: ${advice.recommendation}`,
    ...advice.reasons.map((r) => `  - ${r}`),
    ...(notes.length ? ['', ...notes.map((n) => `Note: ${n}`)] : []),
    '',
  ].join('\n');
}

/** The report as JSON, CSV or text, as the request asked. */
export function sendReport(reply: FastifyReply, format: Format, filename: string, json: unknown, csv: () => string, text: () => string): unknown {
  reply.header('vary', 'accept');
  sendCaution(reply);
  if (format === 'csv') {
    reply.type('text/csv; charset=utf-8').header('content-disposition', `inline; filename="${filename}.csv"`);
    return csv();
  }
  if (format === 'text') {
    reply.type('text/plain; charset=utf-8');
    return text();
  }
  return json;
}


/** The ensemble-size study as text tables. */
export function sizeStudyText(studies: SizeStudyResult[] | null): string[] {
  if (!studies?.length) return [];
  const out: string[] = [''];
  for (const s of studies) {
    out.push(`Ensemble-size study, ${s.source} (${s.members} available; ${s.repeats} random draws per case, ${Math.round(s.caseFraction * 1000) / 10} % of cases; band ${Math.round(s.level * 100)} %):`);
    const f = (x: number | null, d = 3) => (x === null ? '–' : x.toFixed(d));
    out.push(
      ...textTable(
        ['members', 'cases', 'CRPS', 'fair CRPS', 'band width', 'band coverage', 'PIT coverage', 'alpha', 'alpha sd'],
        s.rows.map((r) => [String(r.size), String(r.cases), f(r.crps), f(r.fairCrps), f(r.meanWidth, 2), f(r.coverage), f(r.pitCoverage), f(r.alphaIndex), f(r.alphaIndexSd)]),
      ),
    );
  }
  return out;
}

/** The warnings section of a text report (src/api/warning-tables.ts). */
export function warningsText(w: WarningReport | null): string {
  return w ? warningText(w, textTable).join('\n') : 'Warnings: no corrected run issued with the gauge\'s present thresholds to verify.';
}

/** Stored runs apart by issue-time updating, as score rows in the raw / corrected / stochastic columns. */
export function byUpdatingRows(split: UpdatingSplit | null): ScoreRow[] {
  if (!split) return [];
  const rows: ScoreRow[] = [];
  for (const [group, label] of [['on', 'served with updating'], ['off', 'served without updating']] as const) {
    rows.push({ score: `runs ${label}`, unit: '', values: [null, split[group].runs, split[group].runs] });
    for (const l of split[group].byLead) {
      if (!l.cases) continue;
      rows.push({ score: `CRPS at lead ${l.lead} (runs ${label})`, unit: 'm3/s', values: [null, l.crps.corrected, l.crps.stochastic] });
      rows.push({ score: `coverage of the 95 % band at lead ${l.lead} (runs ${label})`, unit: '', values: [null, null, l.coverage95] });
    }
  }
  return rows;
}

/** The same as a text table, one line per lead. */
export function byUpdatingText(split: (UpdatingSplit & { note: string }) | null): string {
  if (!split) return '';
  const f = (x: number | null) => fmt(x);
  const n = Math.max(split.on.byLead.length, split.off.byLead.length);
  const rows = Array.from({ length: n }, (_, k) => {
    const on = split.on.byLead[k];
    const off = split.off.byLead[k];
    return [String(k + 1), String(on?.cases ?? 0), f(on?.crps.stochastic ?? null), f(on?.coverage95 ?? null), String(off?.cases ?? 0), f(off?.crps.stochastic ?? null), f(off?.coverage95 ?? null)];
  });
  return [
    `Runs served with updating (${split.on.runs}) and without (${split.off.runs}), stochastic stage:`,
    ...textTable(['lead', 'cases on', 'CRPS on', '95 % coverage on', 'cases off', 'CRPS off', '95 % coverage off'], rows),
    split.note,
    '',
  ].join('\n');
}
