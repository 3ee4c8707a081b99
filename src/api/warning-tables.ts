import type { Scored, SourceName, WarningReport } from '../core/verification/index.ts';

/**
 * The warning verification as rows for CSV (columns raw, corrected, stochastic; an interval as
 * two extra rows "… [low]" and "… [high]") and as text tables (each cell "value (low – high)").
 */
export interface WarningRow {
  score: string;
  unit: string;
  values: (number | string | null)[];
}

const SOURCES: SourceName[] = ['raw', 'corrected', 'stochastic'];
const EVENT_TEXT = { 'lead-time': 'at the lead time', 'any-time': 'at any time in the horizon' } as const;
const VALUE_AT = [0.05, 0.1, 0.2, 0.5];

type Cell = Scored | number | null | undefined;

/** Rows with one value per source; scored cells give three rows (value, low, high). */
function rowsOf(score: string, unit: string, get: (s: SourceName) => Cell): WarningRow[] {
  const cells = SOURCES.map(get);
  if (!cells.some((c) => c !== null && typeof c === 'object')) return [{ score, unit, values: cells.map((c) => (typeof c === 'number' ? c : null)) }];
  const pick = (k: keyof Scored) => cells.map((c) => (c && typeof c === 'object' ? c[k] : typeof c === 'number' && k === 'value' ? c : null));
  return [
    { score, unit, values: pick('value') },
    { score: `${score} [low]`, unit, values: pick('low') },
    { score: `${score} [high]`, unit, values: pick('high') },
  ];
}

export function warningRows(w: WarningReport): WarningRow[] {
  const rows: WarningRow[] = [];
  const pct = `${Math.round(w.settings.level * 100)} % interval`;
  for (const ev of w.events) {
    const name = `flow > ${ev.threshold} (${ev.value}) ${EVENT_TEXT[ev.event]}`;
    const src = (s: SourceName) => ev.sources[s];
    rows.push(...rowsOf(`${name}: cases`, '', (s) => src(s)?.n));
    rows.push(...rowsOf(`${name}: observed events`, '', (s) => src(s)?.events));
    rows.push(...rowsOf(`${name}: climatological chance (fitting period)`, '', (s) => (src(s) ? ev.climatologicalRate : null)));
    rows.push(...rowsOf(`${name}: Brier score (${pct})`, '', (s) => src(s)?.brier));
    rows.push(...rowsOf(`${name}: Brier reliability`, '', (s) => src(s)?.reliability));
    rows.push(...rowsOf(`${name}: Brier resolution`, '', (s) => src(s)?.resolution));
    rows.push(...rowsOf(`${name}: Brier uncertainty`, '', (s) => src(s)?.uncertainty));
    rows.push(...rowsOf(`${name}: Brier skill vs fitting-period chance (${pct})`, '', (s) => src(s)?.brierSkill));
    rows.push(...rowsOf(`${name}: ROC area (${pct})`, '', (s) => src(s)?.roc.area));
    rows.push(...rowsOf(`${name}: attention flag hits`, '', (s) => src(s)?.attention.hits));
    rows.push(...rowsOf(`${name}: attention flag false alarms`, '', (s) => src(s)?.attention.falseAlarms));
    rows.push(...rowsOf(`${name}: attention flag misses`, '', (s) => src(s)?.attention.misses));
    rows.push(...rowsOf(`${name}: attention flag hit rate (${pct})`, '', (s) => src(s)?.attention.hitRate));
    rows.push(...rowsOf(`${name}: attention flag false-alarm ratio (${pct})`, '', (s) => src(s)?.attention.falseAlarmRatio));
    rows.push(...rowsOf(`${name}: attention flag critical success index (${pct})`, '', (s) => src(s)?.attention.criticalSuccessIndex));
    rows.push(...rowsOf(`${name}: attention flag Peirce skill`, '', (s) => src(s)?.attention.peirceSkill));
    for (const a of VALUE_AT) rows.push(...rowsOf(`${name}: relative economic value at cost/loss ${a}`, '', (s) => src(s)?.value.find((v) => Math.abs(v.costLoss - a) < 1e-12)?.value));
  }
  const sk = (s: SourceName) => w.skill[s];
  rows.push(...rowsOf(`CRPS (${pct})`, 'm3/s', (s) => sk(s)?.crps));
  rows.push(...rowsOf(`CRPS skill vs seasonal climatology (${pct})`, '', (s) => sk(s)?.crpsSkillClimatology));
  rows.push(...rowsOf(`CRPS skill vs persistence (${pct})`, '', (s) => sk(s)?.crpsSkillPersistence));
  const flood = w.settings.floodRangeFrom;
  if (flood) {
    rows.push(...rowsOf(`threshold-weighted CRPS above ${flood.label} (${pct})`, 'm3/s', (s) => sk(s)?.floodRange.crps));
    rows.push(...rowsOf(`threshold-weighted CRPS skill vs climatology above ${flood.label} (${pct})`, '', (s) => sk(s)?.floodRange.skillClimatology));
  }
  const leads = w.skill.stochastic?.byLead ?? w.skill.corrected?.byLead ?? [];
  for (const l of leads) {
    const at = (s: SourceName) => sk(s)?.byLead.find((x) => x.lead === l.lead);
    rows.push(...rowsOf(`lead ${l.lead + 1}: CRPS`, 'm3/s', (s) => at(s)?.crps));
    rows.push(...rowsOf(`lead ${l.lead + 1}: CRPS skill vs climatology`, '', (s) => at(s)?.crpsSkillClimatology));
    rows.push(...rowsOf(`lead ${l.lead + 1}: CRPS skill vs persistence`, '', (s) => at(s)?.crpsSkillPersistence));
  }
  const classes = w.skill.stochastic?.byForecastClass ?? [];
  classes.forEach((c, i) => {
    const at = (s: SourceName) => sk(s)?.byForecastClass[i];
    rows.push(...rowsOf(`${c.class}: cases`, '', (s) => at(s)?.n));
    rows.push(...rowsOf(`${c.class}: CRPS`, 'm3/s', (s) => at(s)?.crps));
    rows.push(...rowsOf(`${c.class}: CRPS skill vs climatology`, '', (s) => at(s)?.crpsSkillClimatology));
    rows.push(...rowsOf(`${c.class}: median minus observed`, 'm3/s', (s) => at(s)?.medianBias));
  });
  // Differences: each column's forecast minus the reference named in the row (negative = better).
  for (const ref of ['raw', 'corrected'] as const) {
    const d = (s: SourceName) => w.differences.find((x) => x.first === s && x.second === ref);
    rows.push(...rowsOf(`CRPS minus that of ${ref} (${pct})`, 'm3/s', (s) => d(s)?.crps));
    rows.push(...rowsOf(`threshold-weighted CRPS minus that of ${ref} (${pct})`, 'm3/s', (s) => d(s)?.floodRangeCrps));
    for (const ev of w.events.filter((e) => e.event === 'any-time')) {
      rows.push(...rowsOf(`Brier score at any time above ${ev.threshold} minus that of ${ref} (${pct})`, '', (s) => d(s)?.anyTimeBrier.find((b) => b.threshold === ev.threshold)?.difference));
    }
  }
  return rows;
}

const f = (v: number | null | undefined): string => {
  if (v === null || v === undefined || !Number.isFinite(v)) return '–';
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a >= 1000 ? v.toFixed(0) : a >= 100 ? v.toFixed(1) : a >= 1 ? v.toFixed(3) : v.toFixed(4);
};

const cell = (c: Cell): string => {
  if (c === null || c === undefined) return '–';
  if (typeof c === 'number') return f(c);
  if (c.value === null) return '–';
  return c.low !== null && c.high !== null ? `${f(c.value)} (${f(c.low)} – ${f(c.high)})` : f(c.value);
};

/** Text lines: one table per warning event, the CRPS skill table and the paired differences. */
export function warningText(w: WarningReport, table: (header: string[], rows: string[][]) => string[]): string[] {
  if (w.cases === 0 && w.anyTimeRuns === 0) return ['Warnings: no verified cases yet.'];
  const level = `${Math.round(w.settings.level * 100)} %`;
  const out: string[] = [
    `Warnings: ${w.runs} runs, ${w.cases} verified lead times, ${w.anyTimeRuns} runs with every lead time observed; ranges are ${level} moving-block bootstrap intervals (blocks of ${w.settings.blockLength} issues, ${w.settings.replicates} replicates).`,
    `Attention flag = chance at or above ${Math.round(w.settings.attentionLevel * 100)} %.`,
  ];
  const header = ['score', 'raw', 'corrected', 'stochastic'];
  for (const ev of w.events) {
    const src = (s: SourceName) => ev.sources[s];
    const r = (name: string, get: (s: SourceName) => Cell) => [name, ...SOURCES.map((s) => cell(get(s)))];
    out.push('', `flow > ${ev.threshold} (${ev.value} m3/s) ${EVENT_TEXT[ev.event]}; climatological chance in the fitting period ${f(ev.climatologicalRate)}:`);
    out.push(
      ...table(header, [
        ['cases / events', ...SOURCES.map((s) => ((e) => (e ? `${e.n} / ${e.events}` : '–'))(src(s)))],
        r('Brier score', (s) => src(s)?.brier),
        r('  reliability', (s) => src(s)?.reliability),
        r('  resolution', (s) => src(s)?.resolution),
        r('Brier skill', (s) => src(s)?.brierSkill),
        r('ROC area', (s) => src(s)?.roc.area),
        ['hits / false alarms / misses', ...SOURCES.map((s) => ((a) => (a ? `${a.hits} / ${a.falseAlarms} / ${a.misses}` : '–'))(src(s)?.attention))],
        r('hit rate', (s) => src(s)?.attention.hitRate),
        r('false-alarm ratio', (s) => src(s)?.attention.falseAlarmRatio),
        r('critical success index', (s) => src(s)?.attention.criticalSuccessIndex),
        r('value at cost/loss 0.1', (s) => src(s)?.value.find((v) => Math.abs(v.costLoss - 0.1) < 1e-12)?.value),
      ]),
    );
  }
  const sk = (s: SourceName) => w.skill[s];
  const r = (name: string, get: (s: SourceName) => Cell) => [name, ...SOURCES.map((s) => cell(get(s)))];
  out.push('', 'Flows (m3/s):');
  const rows = [
    r('CRPS', (s) => sk(s)?.crps),
    r('CRPS skill vs climatology', (s) => sk(s)?.crpsSkillClimatology),
    r('CRPS skill vs persistence', (s) => sk(s)?.crpsSkillPersistence),
  ];
  if (w.settings.floodRangeFrom) {
    rows.push(r(`tw-CRPS above ${w.settings.floodRangeFrom.label}`, (s) => sk(s)?.floodRange.crps));
    rows.push(r('  skill vs climatology', (s) => sk(s)?.floodRange.skillClimatology));
  }
  for (const l of w.skill.stochastic?.byLead ?? []) {
    const at = (s: SourceName) => sk(s)?.byLead.find((x) => x.lead === l.lead);
    rows.push(r(`lead ${l.lead + 1}: CRPS skill vs climatology`, (s) => at(s)?.crpsSkillClimatology));
  }
  (w.skill.stochastic?.byForecastClass ?? []).forEach((c, i) => {
    rows.push(r(`${c.class} (${c.n}): CRPS skill vs climatology`, (s) => sk(s)?.byForecastClass[i]?.crpsSkillClimatology));
  });
  out.push(...table(header, rows));
  if (w.differences.length) {
    out.push('', 'Paired differences (first minus second; negative = first better):');
    out.push(
      ...table(
        ['stages', 'CRPS', 'tw-CRPS', ...w.events.filter((e) => e.event === 'any-time').map((e) => `Brier any time > ${e.threshold}`)],
        w.differences.map((d) => [`${d.first} − ${d.second}`, cell(d.crps), cell(d.floodRangeCrps), ...d.anyTimeBrier.map((b) => cell(b.difference))]),
      ),
    );
  }
  return out;
}
