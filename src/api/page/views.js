// @ts-check
// The page's two views: the overview of gauges ("/") and one gauge ("/view/:id").
import { drawCharts, findProb, flowLegend, swatch } from './charts.js';
import { h, show } from './dom.js';
import { finite, fmtFlow, fmtLead, fmtLevel, fmtProb, fmtShort, fmtTime, statusMeaning, statusText, UNIT } from './format.js';
import { csvLink } from './csv-link.js';
import { setCaution } from './notices.js';
import { state } from './page-state.js';
import { verificationSection } from './verification-view.js';

/**
 * @typedef {import('./page-state.js').Forecast} Forecast
 * @typedef {import('./page-state.js').ThresholdForecast} ThresholdForecast
 * @typedef {import('./page-state.js').Overview} Overview
 * @typedef {import('./page-state.js').OverviewGauge} OverviewGauge
 */

/**
 * A time in the gauge's zone, with UTC on hover.
 * @param {string} iso
 * @param {string} zone
 * @param {boolean} [short]  without year and zone, under a heading that names the zone
 */
export function timeEl(iso, zone, short = false) {
  return h('time', { datetime: iso, title: fmtTime(iso, 'UTC') }, short ? fmtShort(iso, zone) : fmtTime(iso, zone));
}

/** @param {string} id */
const latestCsvUrl = (id) => `/gauges/${encodeURIComponent(id)}/forecasts/latest?format=csv`;

/** @param {Overview} data */
export function renderOverview(data) {
  document.title = 'Gauges — streamflow forecasts';
  setCaution(data.caution);
  const gauges = data.gauges ?? [];
  const attention = gauges.filter((g) => (g.thresholds ?? []).some((t) => t.attention)).length;
  show(
    h('h1', {}, 'Gauges'),
    h(
      'p',
      { class: 'summary' },
      `${gauges.length} gauge${gauges.length === 1 ? '' : 's'}`,
      attention ? ` · ${attention} with a threshold at the attention level` : ' · none at the attention level',
    ),
    h(
      'p',
      { class: 'note explain' },
      'Chance of exceeding each threshold in the latest run. Highest: the largest chance at a single lead time. ',
      'Any time: the chance of exceeding it at least once within the forecast horizon.',
    ),
    gauges.length ? h('div', { class: 'cards' }, gauges.map(gaugeCard)) : h('p', { class: 'note' }, 'No gauges yet.'),
  );
}

/** @param {OverviewGauge} g */
function gaugeCard(g) {
  const thresholds = g.thresholds ?? [];
  const attention = thresholds.some((t) => t.attention);
  const headingId = `g-${g.id}`;
  return h(
    'article',
    { class: `card${attention ? ' attention' : ''}`, 'data-gauge': g.id, 'aria-labelledby': headingId },
    h('h2', { id: headingId }, h('a', { href: `/view/${encodeURIComponent(g.id)}` }, g.name ?? g.id)),
    h(
      'p',
      { class: 'meta' },
      h('span', { class: `badge s-${g.status}`, title: statusMeaning(g.status) }, statusText(g.status)),
      g.latest
        ? h(
            'span',
            { class: 'latest' },
            'latest run ',
            timeEl(g.latest.issueTime, g.timeZone ?? 'UTC'),
            ' · ',
            h('span', { class: `run-status r-${g.latest.status}` }, statusText(g.latest.status)),
          )
        : h('span', { class: 'latest' }, 'no forecast stored yet'),
    ),
    g.status === 'drifting' ? h('p', { class: 'status-note' }, 'Drifting: recent forecasts verify worse than at fitting. Check the verification; consider a refit.') : null,
    thresholds.length
      ? thresholdTable(g, thresholds)
      : h('p', { class: 'note' }, 'No thresholds set.'),
    g.latest ? h('p', { class: 'table-links' }, csvLink(latestCsvUrl(g.id), `${g.id}-forecast.csv`, `thr-${g.id}`), ' of the latest run') : null,
  );
}

/**
 * @param {OverviewGauge} g
 * @param {OverviewGauge['thresholds']} thresholds
 */
function thresholdTable(g, thresholds) {
  return h(
    'div',
    { class: 'thr-wrap' },
    h(
      'table',
      { class: 'thr', id: `thr-${g.id}` },
      h('caption', { class: 'visually-hidden' }, `Chance of exceeding each threshold at ${g.name ?? g.id}`),
      h(
        'thead',
        {},
        h(
          'tr',
          {},
          h('th', { scope: 'col' }, 'Threshold'),
          h('th', { scope: 'col', class: 'num' }, UNIT),
          h('th', { scope: 'col', class: 'num' }, 'Highest'),
          h('th', { scope: 'col', class: 'num' }, 'Any time'),
        ),
      ),
      h(
        'tbody',
        {},
        thresholds.map((t, i) =>
          h(
            'tr',
            { class: t.attention ? 'attention' : null, 'data-threshold': t.label },
            h(
              'th',
              { scope: 'row' },
              h('span', { class: 'tl' }, swatch(i), ' ', t.label),
              t.attention ? h('span', { class: 'flag' }, 'attention') : null,
            ),
            h('td', { class: 'num' }, fmtLevel(t.value)),
            h('td', { class: 'num max' }, finite(t.maxExceedance) ? probBar(t.maxExceedance) : null, fmtProb(t.maxExceedance)),
            h('td', { class: 'num any' }, fmtProb(t.anyTime)),
          ),
        ),
      ),
    ),
  );
}

/** @param {number} p */
function probBar(p) {
  const fill = h('span', {});
  const bar = h('span', { class: 'pbar', 'aria-hidden': 'true' }, fill);
  fill.style.width = `${Math.max(0, Math.min(1, Number.isFinite(p) ? p : 0)) * 100}%`;
  return bar;
}

/**
 * @param {string} id
 * @param {string} detail
 */
export function renderNoForecast(id, detail) {
  document.title = `${id} — streamflow forecast`;
  setCaution(null);
  show(
    h('nav', { class: 'crumbs' }, h('a', { href: '/' }, '← All gauges')),
    h('h1', {}, id),
    h('p', { class: 'note no-forecast' }, `No forecast is stored for this gauge yet${detail ? ` (${detail})` : ''}. The page updates itself when one arrives.`),
  );
}

/**
 * The observation the run was updated on, or why it was not.
 * @param {Forecast} f
 * @param {string} zone
 * @returns {string}
 */
function updatingText(f, zone) {
  const u = f.updating;
  if (!u) return 'no updating';
  if (u.status === 'on' && u.observation) return `${u.observation.value} ${UNIT} observed ${fmtTime(u.observation.time, zone)} (from the ${u.observation.source})`;
  return `not updated: ${u.reason ?? 'no reason given'}`;
}

/**
 * @param {Forecast} f
 * @param {string} zone  the gauge's IANA time zone
 */
export function renderGauge(f, zone) {
  document.title = `${f.gaugeName ?? f.gaugeId} — streamflow forecast`;
  setCaution(f.caution);
  const thresholds = f.thresholds ?? [];
  const facts = [
    ['Issue time', timeEl(f.issueTime, zone)],
    ['Status', h('span', { class: `run-status r-${f.status}` }, statusText(f.status))],
    ['Model version', f.modelVersion ? `${f.modelVersion.label} (${f.modelVersion.id})` : 'none'],
    ['Updated on', updatingText(f, zone)],
    ['Seed', String(f.seed ?? '–')],
    ['Trajectories', String(f.trajectories ?? '–')],
    ['Members', String(f.ensemble?.corrected?.length ?? f.ensemble?.raw?.length ?? 0)],
    ['Stored', timeEl(f.createdAt, zone)],
    ['Source', f.source ?? '–'],
  ];

  const rawCount = f.ensemble?.raw?.length ?? 0;
  const toggle = h('input', { type: 'checkbox', id: 'raw-toggle', checked: state.showRaw, disabled: rawCount === 0 });
  toggle.addEventListener('change', () => {
    state.showRaw = toggle.checked;
    drawCharts();
  });

  show(
    h('nav', { class: 'crumbs' }, h('a', { href: '/' }, '← All gauges')),
    h('h1', {}, f.gaugeName ?? f.gaugeId),
    f.status === 'degraded'
      ? h(
          'p',
          { class: 'degraded', role: 'alert' },
          h('strong', {}, 'Degraded: '),
          f.degradedReason ?? 'no reason given',
        )
      : null,
    h('dl', { class: 'facts' }, facts.map(([k, v]) => h('div', {}, h('dt', {}, k), h('dd', {}, v)))),
    h(
      'section',
      { 'aria-labelledby': 'flow-h' },
      h('h2', { id: 'flow-h' }, `Flow (${UNIT})`),
      h('div', { class: 'controls' }, h('label', { for: 'raw-toggle' }, toggle, ` Show raw members (${rawCount}, before correction)`)),
      h('figure', { class: 'chart' }, h('div', { id: 'flow-chart', class: 'chart-box' }), h('figcaption', {}, flowLegend(f))),
    ),
    h(
      'section',
      { 'aria-labelledby': 'prob-h' },
      h('h2', { id: 'prob-h' }, 'Chance of exceeding each threshold'),
      thresholds.length
        ? [
            h('ul', { class: 'anytime' }, thresholds.map((t, i) => anyTimeItem(t, i, f))),
            h('figure', { class: 'chart' }, h('div', { id: 'prob-chart', class: 'chart-box' })),
          ]
        : h('p', { class: 'note' }, 'No thresholds are set for this gauge.'),
    ),
    h(
      'section',
      { 'aria-labelledby': 'table-h' },
      h('h2', { id: 'table-h' }, 'Numbers by lead time ', csvLink(latestCsvUrl(f.gaugeId), `${f.gaugeId}-forecast.csv`, 'forecast-table')),
      forecastTable(f, zone),
    ),
    verificationSection(f.gaugeId),
  );
  drawCharts();
}

/**
 * @param {ThresholdForecast} t
 * @param {number} i
 * @param {Forecast} f
 */
function anyTimeItem(t, i, f) {
  const horizon = f.leadTimes?.length ? fmtLead(f.leadTimes[f.leadTimes.length - 1]) : '';
  return h(
    'li',
    { class: t.attention ? 'attention' : null, 'data-threshold': t.label },
    swatch(i),
    ' ',
    h('strong', {}, t.label),
    ` (${fmtLevel(t.value)} ${UNIT}): `,
    h('span', { class: 'p' }, fmtProb(t.anyTime)),
    ` at some time in the next ${horizon}`,
    t.firstLikelyLeadTime ? `; more likely than not from ${fmtLead(t.firstLikelyLeadTime)}` : '',
    t.attention ? h('span', { class: 'flag' }, 'attention') : null,
  );
}

/**
 * @param {Forecast} f
 * @param {string} zone
 */
function forecastTable(f, zone) {
  const probs = f.quantiles?.probabilities ?? [];
  /** @param {number} p */
  const row = (p) => findProb(probs, p);
  const iMed = row(0.5);
  const iLo = row(0.05);
  const iHi = row(0.95);
  const q = f.quantiles?.values ?? [];
  const thresholds = f.thresholds ?? [];
  const level = f.attentionLevel;
  return h(
    'div',
    { class: 'table-wrap' },
    h(
      'table',
      { class: 'numbers', id: 'forecast-table' },
      h(
        'caption',
        {},
        `Median and 5–95 % range in ${UNIT}; chance of exceeding each threshold per lead time.`,
        Number.isFinite(level) ? ` Shaded: at or above the attention level (${fmtProb(level)}).` : '',
      ),
      h(
        'thead',
        {},
        h(
          'tr',
          {},
          h('th', { scope: 'col' }, 'Lead time'),
          h('th', { scope: 'col' }, `Valid time (${zone})`),
          h('th', { scope: 'col', class: 'num' }, 'Median'),
          h('th', { scope: 'col', class: 'num' }, '5–95 % range'),
          thresholds.map((t) => h('th', { scope: 'col', class: 'num' }, `> ${t.label} (${fmtLevel(t.value)})`)),
        ),
      ),
      h(
        'tbody',
        {},
        (f.leadTimes ?? []).map((lead, j) =>
          h(
            'tr',
            {},
            h('th', { scope: 'row' }, fmtLead(lead)),
            h('td', { class: 'when' }, timeEl(f.validTimes[j], zone, true)),
            h('td', { class: 'num' }, iMed >= 0 ? fmtFlow(q[iMed][j]) : '–'),
            h('td', { class: 'num' }, iLo >= 0 && iHi >= 0 ? `${fmtFlow(q[iLo][j])} – ${fmtFlow(q[iHi][j])}` : '–'),
            thresholds.map((t) => {
              const p = t.exceedance?.[j];
              return h('td', { class: `num${Number.isFinite(level) && p >= level ? ' hot' : ''}` }, fmtProb(p));
            }),
          ),
        ),
      ),
    ),
  );
}

