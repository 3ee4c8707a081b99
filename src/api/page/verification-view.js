// @ts-check
// The verification part of a gauge page: on request it reads GET /gauges/:id/verification and
// shows, for the warnings, the attention flag's hits and false alarms, the reliability diagram
// and ROC curve of the chosen threshold, CRPS and CRPS skill per lead time with interval bands,
// and the PIT histogram. The answer is kept per gauge, so a live refresh of the forecast above
// redraws it without asking again.
import { csvLink } from './csv-link.js';
import { h } from './dom.js';
import { fmtLevel, fmtProb, UNIT } from './format.js';
import { getJson, HttpError } from './service-requests.js';
import { perLeadChart, pitChart, reliabilityChart, rocChart, SOURCE_STYLES } from './verification-charts.js';

/**
 * @typedef {import('./verification-charts.js').SourceName} SourceName
 * @typedef {import('./verification-charts.js').Scored} Scored
 * @typedef {import('./verification-charts.js').LeadSkill} LeadSkill
 * @typedef {{ n: number, events: number, brier: Scored, brierSkill: Scored, reliability: number | null, resolution: number | null, diagram: import('./verification-charts.js').DiagramBin[], roc: { points: import('./verification-charts.js').RocPointJson[], area: Scored }, attention: { level: number, hits: number, falseAlarms: number, misses: number, hitRate: Scored, falseAlarmRatio: Scored, criticalSuccessIndex: Scored } }} EventSource
 * @typedef {{ threshold: string, value: number, event: 'lead-time' | 'any-time', climatologicalRate: number | null, sources: Partial<Record<SourceName, EventSource>> }} EventJson
 * @typedef {{ crps: Scored, crpsSkillClimatology: Scored, crpsSkillPersistence: Scored, byLead: LeadSkill[] }} SourceSkill
 * @typedef {object} Verification
 * @property {string} caution
 * @property {{ total: number, verified: number }} runs
 * @property {any} comparison
 * @property {{ settings: { level: number, replicates: number, blockLength: number, attentionLevel: number }, runs: number, cases: number, anyTimeRuns: number, events: EventJson[], skill: Partial<Record<SourceName, SourceSkill>> } | null} warningScores
 */

/** @type {Map<string, Verification>} */
const loaded = new Map();
/** @type {{ threshold: number, event: 'any-time' | 'lead-time' }} */
const choice = { threshold: 0, event: 'any-time' };

const SOURCES = /** @type {SourceName[]} */ (['stochastic', 'corrected', 'raw']);

/** @param {number | null | undefined} v */
const num = (v) => (v === null || v === undefined || !Number.isFinite(v) ? '–' : Math.abs(v) >= 100 ? v.toFixed(0) : Math.abs(v) >= 10 ? v.toFixed(1) : v.toFixed(3));

/**
 * A score with its interval, e.g. "0.412 (0.371 – 0.455)".
 * @param {Scored | undefined} sc
 * @param {(v: number | null) => string} [f]
 */
function withInterval(sc, f = num) {
  if (!sc || sc.value === null) return '–';
  return sc.low !== null && sc.high !== null ? `${f(sc.value)} (${f(sc.low)} – ${f(sc.high)})` : f(sc.value);
}

/**
 * The section placed on the gauge page.
 * @param {string} gaugeId
 */
export function verificationSection(gaugeId) {
  const body = h('div', { id: 'verification-body' });
  const button = h('button', { type: 'button', id: 'verification-load', class: 'load' }, 'Show how past forecasts verified');
  button.addEventListener('click', () => void load(gaugeId, body, button));
  const section = h(
    'section',
    { 'aria-labelledby': 'verification-h', id: 'verification' },
    h('h2', { id: 'verification-h' }, 'How past forecasts verified'),
    h('p', { class: 'note' }, 'Stored runs of this gauge against the observations that came in since: were the warning probabilities reliable, and skilful against a seasonal climatology and persistence? Ranges are 90 % block-bootstrap intervals over issue times.'),
    button,
    body,
  );
  const have = loaded.get(gaugeId);
  if (have) {
    button.hidden = true;
    render(have, body, gaugeId);
  }
  return section;
}

/**
 * @param {string} gaugeId
 * @param {HTMLElement} body
 * @param {HTMLButtonElement} button
 */
async function load(gaugeId, body, button) {
  button.disabled = true;
  body.replaceChildren(h('p', { class: 'note' }, 'Verifying the stored runs…'));
  try {
    const v = /** @type {Verification} */ (await getJson(`/gauges/${encodeURIComponent(gaugeId)}/verification`));
    loaded.set(gaugeId, v);
    button.hidden = true;
    render(v, body, gaugeId);
  } catch (err) {
    const text = err instanceof HttpError ? `${err.status}: ${err.message}` : String(err);
    body.replaceChildren(h('p', { class: 'problem', role: 'alert' }, `Could not load the verification: ${text}`));
    button.disabled = false;
  }
}

/**
 * @param {Verification} v
 * @param {HTMLElement} body
 * @param {string} gaugeId
 */
function render(v, body, gaugeId) {
  const w = v.warningScores;
  if (!w || w.cases === 0) {
    body.replaceChildren(h('p', { class: 'note', id: 'verification-empty' }, 'No stored run has observations to verify against yet.'));
    return;
  }
  const thresholds = [...new Set(w.events.map((e) => e.threshold))];
  if (choice.threshold >= thresholds.length) choice.threshold = 0;
  const pick = h(
    'select',
    { id: 'verification-threshold' },
    thresholds.map((t, i) => {
      const ev = w.events.find((e) => e.threshold === t);
      return h('option', { value: String(i), selected: i === choice.threshold }, `${t} (${fmtLevel(ev?.value)} ${UNIT})`);
    }),
  );
  const kind = h(
    'select',
    { id: 'verification-event' },
    h('option', { value: 'any-time', selected: choice.event === 'any-time' }, 'above at any time in the horizon'),
    h('option', { value: 'lead-time', selected: choice.event === 'lead-time' }, 'above at each lead time'),
  );
  const pictures = h('div', { class: 'verification-grid' });
  const table = h('div', { class: 'table-wrap' });
  const draw = () => {
    choice.threshold = Number(pick.value);
    choice.event = /** @type {'any-time' | 'lead-time'} */ (kind.value);
    const ev = w.events.find((e) => e.threshold === thresholds[choice.threshold] && e.event === choice.event);
    table.replaceChildren(warningTable(ev, w.settings.attentionLevel));
    pictures.replaceChildren(...eventFigures(ev), ...skillFigures(v));
  };
  pick.addEventListener('change', draw);
  kind.addEventListener('change', draw);
  body.replaceChildren(
    h('p', { class: 'summary', id: 'verification-summary' }, `${w.runs} runs, ${w.cases} verified lead times, ${w.anyTimeRuns} runs with every lead time observed. Intervals: ${Math.round(w.settings.level * 100)} % over ${w.settings.replicates} block-bootstrap replicates in blocks of ${w.settings.blockLength} issues.`),
    h('p', { class: 'caution-inline' }, v.caution),
    h('div', { class: 'controls' }, h('label', { for: 'verification-threshold' }, 'Threshold '), pick, ' ', h('label', { for: 'verification-event' }, 'event '), kind),
    h('p', { class: 'table-links' }, csvLink(`/gauges/${encodeURIComponent(gaugeId)}/verification?format=csv`, `${gaugeId}-verification.csv`, 'warning-table'), ' of the verification (all thresholds and stages)'),
    table,
    h('ul', { class: 'legend' }, SOURCES.map((src) => h('li', {}, h('span', { class: `key key-${src}` }), SOURCE_STYLES[src].name))),
    pictures,
  );
  draw();
}

/**
 * @param {EventJson | undefined} ev
 * @param {number} level
 */
function warningTable(ev, level) {
  if (!ev) return h('p', { class: 'note' }, 'No cases for this event.');
  return h(
    'table',
    { class: 'numbers', id: 'warning-table' },
    h(
      'caption',
      {},
      `Attention flag (chance ≥ ${fmtProb(level)}) and probability scores; climatological chance in the fitting period ${fmtProb(ev.climatologicalRate)}.`,
      Object.values(ev.sources).some((e) => e && e.events === 0) ? ' No observed event in these cases: hit rate, ROC area and skill cannot be judged yet.' : '',
    ),
    h(
      'thead',
      {},
      h(
        'tr',
        {},
        h('th', { scope: 'col' }, 'Forecast'),
        ['Cases', 'Events', 'Hits', 'False alarms', 'Misses', 'Hit rate', 'False-alarm ratio', 'Critical success index', 'Brier score', 'Brier skill', 'ROC area'].map((c) => h('th', { scope: 'col', class: 'num' }, c)),
      ),
    ),
    h(
      'tbody',
      {},
      SOURCES.filter((src) => ev.sources[src]).map((src) => {
        const e = /** @type {EventSource} */ (ev.sources[src]);
        const a = e.attention;
        return h(
          'tr',
          { 'data-source': src },
          h('th', { scope: 'row' }, SOURCE_STYLES[src].name),
          [String(e.n), String(e.events), String(a.hits), String(a.falseAlarms), String(a.misses)].map((c) => h('td', { class: 'num' }, c)),
          [a.hitRate, a.falseAlarmRatio, a.criticalSuccessIndex, e.brier, e.brierSkill, e.roc.area].map((sc) => h('td', { class: 'num' }, withInterval(sc))),
        );
      }),
    ),
  );
}

/** @param {EventJson | undefined} ev */
function eventFigures(ev) {
  const st = ev?.sources.stochastic;
  if (!ev || !st) return [];
  const what = `${ev.threshold} ${ev.event === 'any-time' ? 'at any time' : 'at each lead time'}`;
  return [
    h('figure', { class: 'chart small' }, reliabilityChart(st.diagram, `Reliability diagram, ${what}`), h('figcaption', {}, `Reliability, ${what}: dots by bin (area ∝ cases), bars where a reliable forecast would fall.`)),
    h(
      'figure',
      { class: 'chart small' },
      rocChart(
        SOURCES.filter((src) => ev.sources[src]).map((src) => ({ source: src, points: /** @type {EventSource} */ (ev.sources[src]).roc.points })),
        `ROC curves, ${what}`,
      ),
      h('figcaption', {}, `ROC, ${what}: area ${withInterval(st.roc.area)} for the published forecast.`),
    ),
  ];
}

/** @param {Verification} v */
function skillFigures(v) {
  const w = /** @type {NonNullable<Verification['warningScores']>} */ (v.warningScores);
  const crpsSeries = SOURCES.filter((src) => w.skill[src]).map((src) => ({
    key: src,
    colour: SOURCE_STYLES[src].colour,
    dash: SOURCE_STYLES[src].dash,
    rows: /** @type {SourceSkill} */ (w.skill[src]).byLead.map((r) => ({ lead: r.lead, score: r.crps })),
  }));
  const pub = w.skill.stochastic;
  const skillSeries = pub
    ? [
        { key: 'climatology', colour: SOURCE_STYLES.stochastic.colour, dash: '', rows: pub.byLead.map((r) => ({ lead: r.lead, score: r.crpsSkillClimatology })) },
        { key: 'persistence', colour: SOURCE_STYLES.corrected.colour, dash: '7 3', rows: pub.byLead.map((r) => ({ lead: r.lead, score: r.crpsSkillPersistence })) },
      ]
    : [];
  const pit = v.comparison?.stochastic?.pitHistogram;
  return [
    h('figure', { class: 'chart small' }, perLeadChart('crps-lead-svg', 'CRPS per lead time', `CRPS (${UNIT})`, crpsSeries, false), h('figcaption', {}, 'CRPS per lead time, lower is better; shaded: interval.')),
    h(
      'figure',
      { class: 'chart small' },
      perLeadChart('skill-lead-svg', 'CRPS skill per lead time', 'CRPS skill', skillSeries, true),
      h('figcaption', {}, `Skill of the published forecast against a seasonal climatology (solid, overall ${withInterval(pub?.crpsSkillClimatology)}) and persistence (dashed, overall ${withInterval(pub?.crpsSkillPersistence)}); above 0 beats the reference.`),
    ),
    pit && pit.counts?.length
      ? h('figure', { class: 'chart small' }, pitChart(pit.counts, pit.expected), h('figcaption', {}, 'PIT histogram of the published forecast: flat when calibrated, U-shaped when too narrow, hump-shaped when too wide.'))
      : null,
  ].filter((x) => x !== null);
}
