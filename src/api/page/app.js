// Forecast page: the overview of gauges at "/", one gauge at "/view/:id".
// Plain DOM and inline SVG; no framework. Data comes from the service's JSON reads
// (/overview, /gauges/:id/forecasts/latest) and live notices from /events.

const TOKEN_KEY = 'forecast-page.token';
const FALLBACK_CAUTION = 'Guidance only. Flood warnings are decided by the responsible local authority.';
const SVG_NS = 'http://www.w3.org/2000/svg';
const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];
const UNIT = 'm³/s';

// Thresholds all share one dark teal (6:1 on white), apart from the forecast's blue; a dash pattern
// and a marker per threshold tell them apart, and every legend names each one with its value. No
// colour ranks them, so nothing reads as an alarm scale.
const THRESHOLD_COLOUR = '#0f6b66';
const THRESHOLD_STYLES = [
  { colour: THRESHOLD_COLOUR, dash: '', marker: 'circle' },
  { colour: THRESHOLD_COLOUR, dash: '10 4', marker: 'square' },
  { colour: THRESHOLD_COLOUR, dash: '3 3', marker: 'triangle' },
  { colour: THRESHOLD_COLOUR, dash: '12 3 3 3', marker: 'diamond' },
  { colour: THRESHOLD_COLOUR, dash: '6 6', marker: 'cross' },
];

// Nested bands, widest first; opacities add up where bands overlap, so the centre reads darkest.
const BANDS = [
  { lo: 0.05, hi: 0.95, opacity: 0.16, name: '5–95 %' },
  { lo: 0.1, hi: 0.9, opacity: 0.2, name: '10–90 %' },
  { lo: 0.25, hi: 0.75, opacity: 0.28, name: '25–75 %' },
];

const state = {
  token: null,
  view: parseView(location.pathname),
  data: null,
  dataKey: '',
  showRaw: false,
  loading: null,
  again: false,
  lastFocusLoad: 0,
  events: { generation: 0, controller: null, connectedOnce: false },
};

const $ = (id) => document.getElementById(id);

// ---------- small DOM helpers ----------

function h(tag, attrs, ...children) {
  const el = document.createElement(tag);
  setAttrs(el, attrs);
  el.append(...children.flat().filter((c) => c !== null && c !== undefined && c !== false));
  return el;
}

function s(tag, attrs, ...children) {
  const el = document.createElementNS(SVG_NS, tag);
  setAttrs(el, attrs);
  el.append(...children.flat().filter((c) => c !== null && c !== undefined && c !== false));
  return el;
}

/** Replaces the main area's content; null and false entries are skipped. */
function show(...nodes) {
  $('main').replaceChildren(...nodes.flat().filter((n) => n !== null && n !== undefined && n !== false));
}

function setAttrs(el, attrs) {
  for (const [k, v] of Object.entries(attrs ?? {})) {
    if (v === null || v === undefined || v === false) continue;
    el.setAttribute(k, v === true ? '' : String(v));
  }
}

// ---------- formatting (what a reader sees; numbers always as real text) ----------

function fmtFlow(v) {
  if (v === null || v === undefined || !Number.isFinite(v)) return '–';
  const a = Math.abs(v);
  return v.toFixed(a >= 100 ? 0 : a >= 10 ? 1 : 2);
}

/** Threshold levels are set by people: show them as given (up to 6 significant digits). */
function fmtLevel(v) {
  if (v === null || v === undefined || !Number.isFinite(v)) return '–';
  return String(Number(v.toPrecision(6)));
}

/** Axis ticks: as many decimals as the tick step needs. */
function fmtTick(v, step) {
  return v.toFixed(Math.max(0, -Math.floor(Math.log10(step) + 1e-9)));
}

function fmtProb(p) {
  if (p === null || p === undefined || !Number.isFinite(p)) return '–';
  if (p > 0 && p < 0.01) return '<1\u00a0%';
  if (p < 1 && p > 0.99) return '>99\u00a0%';
  return `${Math.round(p * 100)}\u00a0%`;
}

const pad2 = (n) => String(n).padStart(2, '0');

function fmtTime(iso) {
  if (!iso) return '–';
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${d.getUTCFullYear()} ${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())} UTC`;
}

/** Day, month and clock time without year and zone, for table rows under a "(UTC)" heading. */
function fmtShort(iso) {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso ?? '–';
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())}`;
}

function fmtDay(ms) {
  const d = new Date(ms);
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]}`;
}

function fmtClock(ms) {
  const d = new Date(ms);
  return `${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())}`;
}

/** ISO 8601 duration (P1D, PT6H, P1DT12H, PT30M) to seconds; NaN when not understood. */
function durationSeconds(text) {
  const m = /^P(?:(\d+)W)?(?:(\d+)D)?(?:T(?:(\d+)H)?(?:(\d+)M)?(?:(\d+(?:\.\d+)?)S)?)?$/.exec(text ?? '');
  if (!m || text === 'P' || text.endsWith('T')) return NaN;
  const [, w, d, hh, mm, ss] = m.map((x) => (x === undefined ? 0 : Number(x)));
  return (((w * 7 + d) * 24 + hh) * 60 + mm) * 60 + ss;
}

function fmtLead(text) {
  const sec = durationSeconds(text);
  if (!Number.isFinite(sec)) return text;
  const d = Math.floor(sec / 86400);
  const hrs = Math.floor((sec % 86400) / 3600);
  const min = Math.round((sec % 3600) / 60);
  const parts = [];
  if (d) parts.push(`${d}\u00a0d`);
  if (hrs) parts.push(`${hrs}\u00a0h`);
  if (min) parts.push(`${min}\u00a0min`);
  return parts.join(' ') || '0\u00a0h';
}

const STATUS_TEXT = {
  ok: 'ok',
  drifting: 'drifting',
  'no-forecast': 'no forecast',
  'insufficient-data': 'insufficient data',
  corrected: 'corrected',
  degraded: 'degraded',
};
const statusText = (s) => STATUS_TEXT[s] ?? String(s ?? 'unknown');

// ---------- view, token, requests ----------

function parseView(path) {
  const m = /^\/view\/([^/]+)\/?$/.exec(path);
  if (m) return { kind: 'gauge', id: decodeURIComponent(m[1]) };
  return { kind: 'overview' };
}

function storage() {
  try {
    return window.sessionStorage;
  } catch {
    return null; // storage can be blocked; the token then lives for this page only
  }
}

/** Takes `#token=…` out of the address bar into sessionStorage (the fragment never reaches the server). */
function takeToken() {
  const params = new URLSearchParams(location.hash.slice(1));
  const fromUrl = params.get('token');
  if (fromUrl) {
    storage()?.setItem(TOKEN_KEY, fromUrl);
    params.delete('token');
    const rest = params.toString();
    history.replaceState(history.state, '', location.pathname + location.search + (rest ? `#${rest}` : ''));
    return fromUrl;
  }
  return storage()?.getItem(TOKEN_KEY) ?? null;
}

function authHeaders(extra) {
  const headers = { ...extra };
  if (state.token) headers.authorization = `Bearer ${state.token}`;
  return headers;
}

class HttpError extends Error {
  constructor(status, detail) {
    super(detail);
    this.status = status;
  }
}

async function getJson(url) {
  // no-cache: the browser revalidates with the stored ETag, so unchanged data costs a 304.
  const res = await fetch(url, { headers: authHeaders({ accept: 'application/json' }), cache: 'no-cache' });
  if (!res.ok) {
    let detail = res.statusText;
    try {
      const body = await res.json();
      detail = body.detail ?? body.title ?? detail;
    } catch {
      /* not problem+json */
    }
    throw new HttpError(res.status, detail);
  }
  return res.json();
}

function showTokenForm(message) {
  const form = $('token-form');
  form.hidden = false;
  $('token-message').textContent = message;
}

function hideTokenForm() {
  $('token-form').hidden = true;
  $('token-message').textContent = '';
}

function setCaution(text) {
  $('caution').textContent = text && text.trim() ? text : FALLBACK_CAUTION;
}

function announce(text) {
  $('announce').textContent = text;
}

// ---------- loading ----------

/** Loads and shows the current view; calls made while loading run once more afterwards. */
function load() {
  if (state.loading) {
    state.again = true;
    return state.loading;
  }
  state.loading = (async () => {
    try {
      if (state.view.kind === 'gauge') await loadGauge(state.view.id);
      else await loadOverview();
    } finally {
      state.loading = null;
      if (state.again) {
        state.again = false;
        void load();
      }
    }
  })();
  return state.loading;
}

async function loadOverview() {
  let data;
  try {
    data = await getJson('/overview');
  } catch (err) {
    return showLoadError(err, 'the overview');
  }
  hideTokenForm();
  const key = JSON.stringify(data);
  if (key === state.dataKey) return;
  state.data = data;
  state.dataKey = key;
  renderOverview(data);
}

async function loadGauge(id) {
  let data;
  try {
    data = await getJson(`/gauges/${encodeURIComponent(id)}/forecasts/latest`);
  } catch (err) {
    if (err instanceof HttpError && err.status === 404) {
      hideTokenForm();
      state.data = null;
      state.dataKey = '';
      return renderNoForecast(id, err.message);
    }
    return showLoadError(err, 'the forecast');
  }
  hideTokenForm();
  const key = JSON.stringify(data);
  if (key === state.dataKey) return;
  state.data = data;
  state.dataKey = key;
  renderGauge(data);
}

function showLoadError(err, what) {
  if (err instanceof HttpError && err.status === 401) {
    showTokenForm(state.token ? 'The token was refused; enter a valid read token.' : 'Enter a read token to see the data.');
    if (!state.data) show(h('p', { class: 'note' }, `A read token is needed to load ${what}.`));
    return;
  }
  const text = err instanceof HttpError ? `${err.status}: ${err.message}` : `the service did not answer (${err.message})`;
  const box = h('p', { class: 'problem', role: 'alert' }, `Could not load ${what}: ${text}`);
  if (state.data) {
    $('main').querySelector('.problem')?.remove();
    $('main').prepend(box); // keep the last good data visible below the message
  } else {
    show(box);
  }
}

// ---------- overview ----------

function renderOverview(data) {
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
      h('span', { class: `badge s-${g.status}` }, statusText(g.status)),
      g.latest
        ? h(
            'span',
            { class: 'latest' },
            'latest run ',
            h('time', { datetime: g.latest.issueTime }, fmtTime(g.latest.issueTime)),
            ' · ',
            h('span', { class: `run-status r-${g.latest.status}` }, statusText(g.latest.status)),
          )
        : h('span', { class: 'latest' }, 'no forecast stored yet'),
    ),
    thresholds.length
      ? thresholdTable(g, thresholds)
      : h('p', { class: 'note' }, 'No thresholds set.'),
  );
}

function thresholdTable(g, thresholds) {
  return h(
    'div',
    { class: 'thr-wrap' },
    h(
      'table',
      { class: 'thr' },
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

function probBar(p) {
  const bar = h('span', { class: 'pbar', 'aria-hidden': 'true' }, h('span', {}));
  const fill = bar.firstChild;
  fill.style.width = `${Math.max(0, Math.min(1, Number.isFinite(p) ? p : 0)) * 100}%`;
  return bar;
}

function swatch(i) {
  const st = THRESHOLD_STYLES[i % THRESHOLD_STYLES.length];
  return s(
    'svg',
    { class: 'swatch', width: 26, height: 12, 'aria-hidden': 'true', focusable: 'false' },
    s('line', { x1: 1, x2: 25, y1: 6, y2: 6, stroke: st.colour, 'stroke-width': 2.5, 'stroke-dasharray': st.dash || null }),
    marker(st.marker, 13, 6, st.colour),
  );
}

// ---------- one gauge ----------

function renderNoForecast(id, detail) {
  document.title = `${id} — streamflow forecast`;
  setCaution(null);
  show(
    h('nav', { class: 'crumbs' }, h('a', { href: '/' }, '← All gauges')),
    h('h1', {}, id),
    h('p', { class: 'note no-forecast' }, `No forecast is stored for this gauge yet${detail ? ` (${detail})` : ''}. The page updates itself when one arrives.`),
  );
}

function renderGauge(f) {
  document.title = `${f.gaugeName ?? f.gaugeId} — streamflow forecast`;
  setCaution(f.caution);
  const thresholds = f.thresholds ?? [];
  const facts = [
    ['Issue time', h('time', { datetime: f.issueTime }, fmtTime(f.issueTime))],
    ['Status', h('span', { class: `run-status r-${f.status}` }, statusText(f.status))],
    ['Model version', f.modelVersion ? `${f.modelVersion.label} (${f.modelVersion.id})` : 'none'],
    ['Seed', String(f.seed ?? '–')],
    ['Trajectories', String(f.trajectories ?? '–')],
    ['Members', String(f.ensemble?.corrected?.length ?? f.ensemble?.raw?.length ?? 0)],
    ['Stored', fmtTime(f.createdAt)],
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
    h('section', { 'aria-labelledby': 'table-h' }, h('h2', { id: 'table-h' }, 'Numbers by lead time'), forecastTable(f)),
  );
  drawCharts();
}

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

function flowLegend(f) {
  // Nested bands add up: the shade of each ring is what the eye sees where the bands overlap.
  let clear = 1;
  const shades = BANDS.map((b) => {
    clear *= 1 - b.opacity;
    return { name: b.name, opacity: 1 - clear };
  }).reverse();
  const items = shades.map((b) => legendItem(s('rect', { class: 'band', x: 1, y: 1, width: 20, height: 10, 'fill-opacity': b.opacity.toFixed(3) }), b.name));
  items.push(legendItem(s('line', { class: 'median', x1: 1, x2: 21, y1: 6, y2: 6 }), 'median'));
  items.push(legendItem(s('line', { class: 'member-line', x1: 1, x2: 21, y1: 6, y2: 6 }), 'corrected members'));
  if (state.showRaw) items.push(legendItem(s('line', { class: 'raw-line', x1: 1, x2: 21, y1: 6, y2: 6 }), 'raw members'));
  if (f.recent?.times?.length) {
    items.push(legendItem(s('g', { class: 'observed' }, s('line', { x1: 1, x2: 21, y1: 6, y2: 6 }), s('circle', { cx: 11, cy: 6, r: 2.5 })), 'observed'));
  }
  return h('ul', { class: 'legend' }, items);
}

function legendItem(shape, text) {
  return h('li', {}, s('svg', { width: 22, height: 12, 'aria-hidden': 'true', focusable: 'false' }, shape), ' ', text);
}

function forecastTable(f) {
  const probs = f.quantiles?.probabilities ?? [];
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
          h('th', { scope: 'col' }, 'Valid time (UTC)'),
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
            h('td', { class: 'when' }, h('time', { datetime: f.validTimes[j] }, fmtShort(f.validTimes[j]))),
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

function findProb(probs, p) {
  return probs.findIndex((x) => Math.abs(x - p) < 1e-9);
}

// ---------- charts ----------

function drawCharts() {
  const f = state.data;
  if (!f || state.view.kind !== 'gauge') return;
  const flowBox = $('flow-chart');
  if (!flowBox) return;
  const width = Math.max(300, Math.floor(flowBox.clientWidth || 800));
  fitRightMargin(f, width);
  const scaleX = timeScale(f, width);
  flowBox.replaceChildren(flowChart(f, width, scaleX));
  const legend = flowBox.parentElement.querySelector('figcaption');
  legend?.replaceChildren(flowLegend(f));
  const probBox = $('prob-chart');
  if (probBox) probBox.replaceChildren(probChart(f, width, scaleX));
}

// Shared by both charts; the right margin holds the threshold labels and is sized to them.
const MARGIN = { top: 16, right: 150, bottom: 34, left: 56 };

// On narrow screens the labels move inside the plot (right-aligned, above their line) so the
// plot keeps most of the width.
const LABELS = { inside: false };

function fitRightMargin(f, width) {
  const longest = Math.max(0, ...(f.thresholds ?? []).map((t) => `↑ ${t.label} ${fmtLevel(t.value)}`.length));
  const wanted = Math.min(180, Math.max(60, Math.round(longest * 7.2) + 16));
  LABELS.inside = wanted > width * 0.22;
  MARGIN.right = LABELS.inside ? 12 : wanted;
}

/** A threshold label at height y: in the right margin, or inside the plot's right edge. */
function thresholdLabel(x, y, colour, text) {
  return LABELS.inside
    ? s('text', { class: 'threshold-label', x: x.range[1] - 4, y, fill: colour, 'text-anchor': 'end' }, text)
    : s('text', { class: 'threshold-label', x: x.range[1] + 10, y, fill: colour }, text);
}

function ms(iso) {
  return new Date(iso).getTime();
}

/** Shared x scale of both charts, so a lead time sits at the same place in each. */
function timeScale(f, width) {
  const times = (f.validTimes ?? []).map(ms);
  const recent = (f.recent?.times ?? []).map(ms);
  const issue = ms(f.issueTime);
  const all = [...recent, issue, ...times].filter(Number.isFinite);
  const t0 = Math.min(...all);
  const t1 = Math.max(...all);
  const left = MARGIN.left;
  const right = width - MARGIN.right;
  const span = t1 > t0 ? t1 - t0 : 1;
  const x = (t) => left + ((t - t0) / span) * (right - left);
  x.domain = [t0, t1];
  x.range = [left, right];
  return x;
}

function linearScale(d0, d1, r0, r1) {
  const k = (r1 - r0) / (d1 - d0 || 1);
  return (v) => r0 + (v - d0) * k;
}

/** Round tick steps of 1, 2 or 5 × 10^k giving about `count` ticks. */
function niceTicks(lo, hi, count) {
  const raw = (hi - lo) / Math.max(1, count);
  const mag = 10 ** Math.floor(Math.log10(raw || 1));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((st) => raw <= st) ?? 10 * mag;
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
  return { ticks: out, step };
}

const HOUR = 3600e3;
const DAY = 24 * HOUR;

function timeTicks(t0, t1, widthPx) {
  const max = Math.max(2, Math.floor(widthPx / 70));
  const steps = [HOUR, 3 * HOUR, 6 * HOUR, 12 * HOUR, DAY, 2 * DAY, 7 * DAY, 14 * DAY, 28 * DAY];
  const step = steps.find((st) => (t1 - t0) / st <= max) ?? steps[steps.length - 1];
  const out = [];
  // steps of a day or more start at the first midnight, shorter ones at multiples of the step
  const first = step >= DAY ? Math.ceil(t0 / DAY) * DAY : Math.ceil(t0 / step) * step;
  for (let t = first; t <= t1; t += step) out.push(t);
  const label = step >= DAY ? fmtDay : (t) => (t % DAY === 0 ? fmtDay(t) : fmtClock(t));
  return out.map((t) => ({ t, text: label(t) }));
}

/** Path through the points, broken where a value is missing. */
function linePath(xs, ys) {
  let d = '';
  let pen = false;
  for (let i = 0; i < xs.length; i++) {
    const ok = Number.isFinite(xs[i]) && Number.isFinite(ys[i]);
    if (!ok) {
      pen = false;
      continue;
    }
    d += `${pen ? 'L' : 'M'}${xs[i].toFixed(1)},${ys[i].toFixed(1)}`;
    pen = true;
  }
  return d;
}

/** Closed band between a lower and an upper series, one polygon per unbroken run of values. */
function bandPath(xs, lo, hi) {
  let d = '';
  let run = [];
  const flush = () => {
    if (run.length) {
      d += `M${run.map((i) => `${xs[i].toFixed(1)},${hi[i].toFixed(1)}`).join('L')}`;
      d += `L${run
        .slice()
        .reverse()
        .map((i) => `${xs[i].toFixed(1)},${lo[i].toFixed(1)}`)
        .join('L')}Z`;
    }
    run = [];
  };
  for (let i = 0; i < xs.length; i++) {
    if (Number.isFinite(lo[i]) && Number.isFinite(hi[i])) run.push(i);
    else flush();
  }
  flush();
  return d;
}

const finite = (v) => v !== null && v !== undefined && Number.isFinite(v);

/** Spreads label positions at least `gap` apart, keeping them inside [min, max]. */
function spreadLabels(ys, gap, min, max) {
  const order = ys.map((y, i) => ({ y, i })).sort((a, b) => a.y - b.y);
  for (let k = 1; k < order.length; k++) order[k].y = Math.max(order[k].y, order[k - 1].y + gap);
  const over = order.length ? order[order.length - 1].y - max : 0;
  if (over > 0) for (const o of order) o.y -= over;
  for (let k = 0; k < order.length; k++) order[k].y = Math.max(order[k].y, min + k * gap);
  const out = new Array(ys.length);
  for (const o of order) out[o.i] = o.y;
  return out;
}

function axisX(x, y0, height) {
  const [t0, t1] = x.domain;
  const ticks = timeTicks(t0, t1, x.range[1] - x.range[0]);
  return s(
    'g',
    { class: 'axis x', 'aria-hidden': 'true' },
    s('line', { x1: x.range[0], x2: x.range[1], y1: y0, y2: y0, class: 'axis-line' }),
    ticks.map(({ t, text }) =>
      s(
        'g',
        {},
        s('line', { x1: x(t), x2: x(t), y1: MARGIN.top, y2: y0, class: 'grid' }),
        s('line', { x1: x(t), x2: x(t), y1: y0, y2: y0 + 5, class: 'tick' }),
        s('text', { x: x(t), y: y0 + 18, 'text-anchor': 'middle' }, text),
      ),
    ),
    s('text', { x: x.range[1], y: height - 2, 'text-anchor': 'end', class: 'axis-title' }, 'valid time (UTC)'),
  );
}

function flowChart(f, width, x) {
  const height = 380;
  const y0 = height - MARGIN.bottom;
  const probs = f.quantiles?.probabilities ?? [];
  const q = f.quantiles?.values ?? [];
  const xs = (f.validTimes ?? []).map((t) => x(ms(t)));
  const corrected = f.ensemble?.corrected ?? [];
  const raw = f.ensemble?.raw ?? [];
  const recentT = f.recent?.times ?? [];
  const recentV = f.recent?.observed ?? [];
  const thresholds = f.thresholds ?? [];

  // y range: everything drawn (raw members always, so the toggle does not rescale), and the lowest
  // threshold above the data so the distance to it shows, unless it is far above.
  let dataMax = 0;
  const take = (arr) => {
    for (const v of arr ?? []) if (finite(v) && v > dataMax) dataMax = v;
  };
  q.forEach(take);
  corrected.forEach((m) => take(m.values));
  raw.forEach((m) => take(m.values));
  take(recentV);
  if (!(dataMax > 0)) dataMax = 1;
  let top = dataMax;
  for (const t of thresholds) {
    if (t.value <= dataMax) top = Math.max(top, t.value);
  }
  const next = thresholds.filter((t) => t.value > dataMax).sort((a, b) => a.value - b.value)[0];
  if (next && next.value <= 3 * dataMax) top = next.value;
  const { ticks: yTicks, step: yStep } = niceTicks(0, top * 1.06, 5);
  const yMax = Math.max(yTicks[yTicks.length - 1], top * 1.06);
  const y = linearScale(0, yMax, y0, MARGIN.top);

  const titleId = 'flow-title';
  const descId = 'flow-desc';
  const svg = s('svg', {
    class: 'fan',
    id: 'flow-svg',
    viewBox: `0 0 ${width} ${height}`,
    width,
    height,
    role: 'img',
    'aria-labelledby': `${titleId} ${descId}`,
  });
  svg.append(s('title', { id: titleId }, `Forecast flow at ${f.gaugeName ?? f.gaugeId}, issued ${fmtTime(f.issueTime)}`));
  svg.append(s('desc', { id: descId }, describeFlow(f, probs, q, thresholds)));

  // grid and axes
  svg.append(
    s(
      'g',
      { class: 'axis y', 'aria-hidden': 'true' },
      yTicks.map((v) =>
        s(
          'g',
          {},
          s('line', { x1: MARGIN.left, x2: x.range[1], y1: y(v), y2: y(v), class: 'grid' }),
          s('text', { x: MARGIN.left - 6, y: y(v) + 4, 'text-anchor': 'end' }, fmtTick(v, yStep)),
        ),
      ),
      s('text', { x: 12, y: MARGIN.top + (y0 - MARGIN.top) / 2, class: 'axis-title', transform: `rotate(-90 12 ${MARGIN.top + (y0 - MARGIN.top) / 2})`, 'text-anchor': 'middle' }, `flow (${UNIT})`),
    ),
  );
  svg.append(axisX(x, y0, height));

  const plot = s('g', { class: 'plot' });
  svg.append(plot);

  // bands, widest first
  for (const band of BANDS) {
    const iLo = findProb(probs, band.lo);
    const iHi = findProb(probs, band.hi);
    if (iLo < 0 || iHi < 0) continue;
    const lo = q[iLo].map((v) => (finite(v) ? y(v) : NaN));
    const hi = q[iHi].map((v) => (finite(v) ? y(v) : NaN));
    plot.append(s('path', { class: 'band', d: bandPath(xs, lo, hi), 'fill-opacity': band.opacity, 'data-band': band.name }));
  }

  // members
  const members = s('g', { class: 'members corrected', 'aria-hidden': 'true' });
  for (const m of corrected) {
    members.append(s('path', { d: linePath(xs, m.values.map((v) => (finite(v) ? y(v) : NaN))), 'data-member': m.id }));
  }
  plot.append(members);
  if (state.showRaw) {
    const rawG = s('g', { class: 'members raw', 'aria-hidden': 'true' });
    for (const m of raw) rawG.append(s('path', { d: linePath(xs, m.values.map((v) => (finite(v) ? y(v) : NaN))), 'data-member': m.id }));
    plot.append(rawG);
  }

  // median
  const iMed = findProb(probs, 0.5);
  if (iMed >= 0) plot.append(s('path', { class: 'median', d: linePath(xs, q[iMed].map((v) => (finite(v) ? y(v) : NaN))) }));

  // observations before issue time
  if (recentT.length) {
    const ox = recentT.map((t) => x(ms(t)));
    const oy = recentV.map((v) => (finite(v) ? y(v) : NaN));
    const obs = s('g', { class: 'observed' }, s('path', { d: linePath(ox, oy) }));
    ox.forEach((px, i) => {
      if (Number.isFinite(oy[i])) obs.append(s('circle', { cx: px, cy: oy[i], r: 2.8 }));
    });
    plot.append(obs);
  }

  // issue time
  const xi = x(ms(f.issueTime));
  svg.append(
    s(
      'g',
      { class: 'issue', 'aria-hidden': 'true' },
      s('line', { x1: xi, x2: xi, y1: MARGIN.top, y2: y0 }),
      s('text', { x: xi + 4, y: MARGIN.top + 10 }, 'issued'),
    ),
  );

  // thresholds: lines across the plot, labels in the right margin, spread so they never overlap
  const visible = thresholds.map((t, i) => ({ t, i })).filter(({ t }) => t.value <= yMax);
  const above = thresholds.map((t, i) => ({ t, i })).filter(({ t }) => t.value > yMax);
  const labelYs = spreadLabels(
    visible.map(({ t }) => y(t.value) + (LABELS.inside ? -5 : 4)),
    15,
    MARGIN.top + 10 + above.length * 15,
    y0,
  );
  const thrG = s('g', { class: 'thresholds' });
  visible.forEach(({ t, i }, k) => {
    const st = THRESHOLD_STYLES[i % THRESHOLD_STYLES.length];
    thrG.append(
      s(
        'g',
        { class: 'threshold', 'data-threshold': t.label },
        s('line', { x1: MARGIN.left, x2: x.range[1], y1: y(t.value), y2: y(t.value), stroke: st.colour, 'stroke-width': 1.8, 'stroke-dasharray': st.dash || null }),
        marker(st.marker, x.range[1], y(t.value), st.colour),
        LABELS.inside ? null : s('line', { x1: x.range[1], x2: x.range[1] + 8, y1: y(t.value), y2: labelYs[k] - 4, stroke: st.colour, 'stroke-width': 1 }),
        thresholdLabel(x, labelYs[k], st.colour, `${t.label} ${fmtLevel(t.value)}`),
      ),
    );
  });
  above.forEach(({ t, i }, k) => {
    const st = THRESHOLD_STYLES[i % THRESHOLD_STYLES.length];
    thrG.append(
      s(
        'g',
        { class: 'threshold above', 'data-threshold': t.label },
        thresholdLabel(x, MARGIN.top + 10 + k * 15, st.colour, `↑ ${t.label} ${fmtLevel(t.value)}`),
      ),
    );
  });
  svg.append(thrG);

  addHover(svg, f, xs, y0);
  return svg;
}

function describeFlow(f, probs, q, thresholds) {
  const iMed = findProb(probs, 0.5);
  const iHi = findProb(probs, 0.95);
  const n = f.leadTimes?.length ?? 0;
  const parts = [];
  if (iMed >= 0 && n) {
    parts.push(`Median flow ${fmtFlow(q[iMed][0])} ${UNIT} at ${fmtLead(f.leadTimes[0])} and ${fmtFlow(q[iMed][n - 1])} ${UNIT} at ${fmtLead(f.leadTimes[n - 1])}.`);
  }
  if (iHi >= 0 && n) {
    let j = 0;
    for (let k = 1; k < n; k++) if (finite(q[iHi][k]) && !(q[iHi][k] <= q[iHi][j])) j = k;
    parts.push(`Highest 95 % quantile ${fmtFlow(q[iHi][j])} ${UNIT} at ${fmtLead(f.leadTimes[j])}.`);
  }
  if (thresholds.length) parts.push(`Thresholds: ${thresholds.map((t) => `${t.label} ${fmtLevel(t.value)} ${UNIT}`).join(', ')}.`);
  parts.push('The table below lists every value.');
  return parts.join(' ');
}

/** A crosshair with the values at the nearest lead time, for pointer users; the table has them all. */
function addHover(svg, f, xs, y0) {
  const probs = f.quantiles?.probabilities ?? [];
  const q = f.quantiles?.values ?? [];
  const iMed = findProb(probs, 0.5);
  const iLo = findProb(probs, 0.05);
  const iHi = findProb(probs, 0.95);
  const guide = s('line', { class: 'guide', y1: MARGIN.top, y2: y0, visibility: 'hidden' });
  const box = s('g', { class: 'readout', visibility: 'hidden', 'aria-hidden': 'true' });
  const bg = s('rect', { rx: 4, ry: 4 });
  const thresholds = f.thresholds ?? [];
  const lines = Array.from({ length: 3 + thresholds.length }, (_, k) => s('text', { x: 8, y: 16 + k * 15 }));
  box.append(bg, ...lines);
  svg.append(guide, box);
  svg.addEventListener('pointermove', (ev) => {
    const rect = svg.getBoundingClientRect();
    const scale = (svg.viewBox.baseVal?.width || rect.width) / rect.width;
    const px = (ev.clientX - rect.left) * scale;
    let j = -1;
    let best = Infinity;
    xs.forEach((x, k) => {
      if (Math.abs(x - px) < best) {
        best = Math.abs(x - px);
        j = k;
      }
    });
    if (j < 0 || best > 40) {
      guide.setAttribute('visibility', 'hidden');
      box.setAttribute('visibility', 'hidden');
      return;
    }
    guide.setAttribute('x1', xs[j]);
    guide.setAttribute('x2', xs[j]);
    guide.setAttribute('visibility', 'visible');
    lines[0].textContent = `${fmtLead(f.leadTimes[j])} · ${fmtTime(f.validTimes[j])}`;
    lines[1].textContent = iMed >= 0 ? `median ${fmtFlow(q[iMed][j])} ${UNIT}` : '';
    lines[2].textContent = iLo >= 0 && iHi >= 0 ? `5–95 %: ${fmtFlow(q[iLo][j])} – ${fmtFlow(q[iHi][j])}` : '';
    thresholds.forEach((t, k) => {
      lines[3 + k].textContent = `> ${t.label}: ${fmtProb(t.exceedance?.[j])}`;
    });
    const w = 190;
    const bx = xs[j] + w + 12 > svg.viewBox.baseVal.width - 4 ? xs[j] - w - 8 : xs[j] + 8;
    box.setAttribute('transform', `translate(${bx},${MARGIN.top + 4})`);
    bg.setAttribute('width', w);
    bg.setAttribute('height', 10 + lines.length * 15);
    box.setAttribute('visibility', 'visible');
  });
  svg.addEventListener('pointerleave', () => {
    guide.setAttribute('visibility', 'hidden');
    box.setAttribute('visibility', 'hidden');
  });
}

function marker(kind, cx, cy, colour) {
  const r = 3.6;
  switch (kind) {
    case 'square':
      return s('rect', { x: cx - r, y: cy - r, width: 2 * r, height: 2 * r, fill: colour });
    case 'triangle':
      return s('path', { d: `M${cx},${cy - r - 1}L${cx + r + 0.6},${cy + r}L${cx - r - 0.6},${cy + r}Z`, fill: colour });
    case 'diamond':
      return s('path', { d: `M${cx},${cy - r - 1}L${cx + r + 1},${cy}L${cx},${cy + r + 1}L${cx - r - 1},${cy}Z`, fill: colour });
    case 'cross':
      return s('path', { d: `M${cx - r},${cy - r}L${cx + r},${cy + r}M${cx - r},${cy + r}L${cx + r},${cy - r}`, stroke: colour, 'stroke-width': 2 });
    default:
      return s('circle', { cx, cy, r, fill: colour });
  }
}

function probChart(f, width, x) {
  const height = 220;
  const y0 = height - MARGIN.bottom;
  const y = linearScale(0, 1, y0, MARGIN.top);
  const xs = (f.validTimes ?? []).map((t) => x(ms(t)));
  const thresholds = f.thresholds ?? [];
  const svg = s('svg', {
    class: 'prob',
    id: 'prob-svg',
    viewBox: `0 0 ${width} ${height}`,
    width,
    height,
    role: 'img',
    'aria-labelledby': 'prob-title prob-desc',
  });
  svg.append(s('title', { id: 'prob-title' }, `Chance of exceeding each threshold by valid time at ${f.gaugeName ?? f.gaugeId}`));
  svg.append(
    s(
      'desc',
      { id: 'prob-desc' },
      thresholds.length
        ? `${thresholds.map((t) => `${t.label}: highest ${fmtProb(Math.max(0, ...(t.exceedance ?? []).filter(finite)))}, any time ${fmtProb(t.anyTime)}`).join('; ')}. The table below lists every value.`
        : 'No thresholds.',
    ),
  );
  svg.append(
    s(
      'g',
      { class: 'axis y', 'aria-hidden': 'true' },
      [0, 0.25, 0.5, 0.75, 1].map((p) =>
        s(
          'g',
          {},
          s('line', { x1: MARGIN.left, x2: x.range[1], y1: y(p), y2: y(p), class: 'grid' }),
          s('text', { x: MARGIN.left - 6, y: y(p) + 4, 'text-anchor': 'end' }, `${p * 100} %`),
        ),
      ),
      s('text', { x: 12, y: MARGIN.top + (y0 - MARGIN.top) / 2, class: 'axis-title', transform: `rotate(-90 12 ${MARGIN.top + (y0 - MARGIN.top) / 2})`, 'text-anchor': 'middle' }, 'chance'),
    ),
  );
  svg.append(axisX(x, y0, height));

  const level = f.attentionLevel;
  if (finite(level)) {
    svg.append(
      s(
        'g',
        { class: 'attention-level', 'aria-hidden': 'true' },
        s('line', { x1: MARGIN.left, x2: x.range[1], y1: y(level), y2: y(level) }),
        s('text', { x: MARGIN.left + 4, y: y(level) - 4 }, `attention level ${fmtProb(level)}`),
      ),
    );
  }

  const xi = x(ms(f.issueTime));
  svg.append(s('line', { class: 'issue-line', x1: xi, x2: xi, y1: MARGIN.top, y2: y0, 'aria-hidden': 'true' }));

  const ends = [];
  thresholds.forEach((t, i) => {
    const st = THRESHOLD_STYLES[i % THRESHOLD_STYLES.length];
    const ys = (t.exceedance ?? []).map((p) => (finite(p) ? y(p) : NaN));
    const g = s('g', { class: 'series', 'data-threshold': t.label });
    g.append(s('path', { d: linePath(xs, ys), fill: 'none', stroke: st.colour, 'stroke-width': 2, 'stroke-dasharray': st.dash || null }));
    xs.forEach((px, k) => {
      if (Number.isFinite(ys[k])) g.append(marker(st.marker, px, ys[k], st.colour));
    });
    svg.append(g);
    let last = ys.length - 1;
    while (last >= 0 && !Number.isFinite(ys[last])) last--;
    ends.push({ i, t, y: last >= 0 ? ys[last] : y0 });
  });
  const labelYs = spreadLabels(
    ends.map((e) => e.y + (LABELS.inside ? -8 : 4)),
    14,
    MARGIN.top + 10,
    y0 - (LABELS.inside ? 8 : 0),
  );
  ends.forEach((e, k) => {
    const st = THRESHOLD_STYLES[e.i % THRESHOLD_STYLES.length];
    svg.append(thresholdLabel(x, labelYs[k], st.colour, e.t.label));
  });
  return svg;
}

// ---------- live updates ----------

function setLive(stateName, text) {
  const el = $('live');
  el.dataset.state = stateName;
  el.textContent = text;
}

/** Follows /events with fetch streaming (EventSource cannot send the Authorization header). */
async function followEvents() {
  const generation = ++state.events.generation;
  state.events.controller?.abort();
  let delay = 1000;
  while (generation === state.events.generation) {
    const controller = new AbortController();
    state.events.controller = controller;
    let watchdog = 0;
    let connectedAt = 0;
    // keep-alive comments come every 15 s; silence for longer means a dead connection
    const arm = () => {
      clearTimeout(watchdog);
      watchdog = setTimeout(() => controller.abort(), 45_000);
    };
    try {
      setLive('connecting', 'connecting…');
      arm();
      const res = await fetch('/events', { headers: authHeaders({ accept: 'text/event-stream' }), signal: controller.signal, cache: 'no-store' });
      if (res.status === 401) {
        clearTimeout(watchdog);
        setLive('token', 'live updates need a token');
        showTokenForm(state.token ? 'The token was refused; enter a valid read token.' : 'Enter a read token to see the data.');
        return; // restarted when a token is entered
      }
      if (!res.ok || !res.body) throw new Error(`events answered ${res.status}`);
      setLive('live', 'live');
      connectedAt = Date.now();
      if (state.events.connectedOnce) void load(); // catch up on anything missed while away
      state.events.connectedOnce = true;
      await readEvents(res.body, arm, onEvent);
    } catch {
      /* reconnect below */
    } finally {
      clearTimeout(watchdog);
    }
    if (generation !== state.events.generation) return;
    // back to a short wait only after a connection that held; one that drops at once keeps backing off
    if (connectedAt && Date.now() - connectedAt > 10_000) delay = 1000;
    const wait = delay + Math.round(Math.random() * 300);
    setLive('waiting', `reconnecting in ${Math.round(wait / 1000)} s`);
    await new Promise((r) => setTimeout(r, wait));
    delay = Math.min(delay * 2, 30_000);
  }
}

/** Minimal text/event-stream parser (WHATWG HTML, server-sent events): fields per line, blank line dispatches. */
async function readEvents(body, onBytes, dispatch) {
  const reader = body.pipeThrough(new TextDecoderStream()).getReader();
  let buffer = '';
  let type = '';
  let data = [];
  for (;;) {
    const { value, done } = await reader.read();
    if (done) return;
    onBytes();
    buffer += value;
    for (;;) {
      const m = /\r\n|\r|\n/.exec(buffer);
      if (!m) break;
      if (m[0] === '\r' && m.index === buffer.length - 1) break; // a \n may follow in the next chunk
      const line = buffer.slice(0, m.index);
      buffer = buffer.slice(m.index + m[0].length);
      if (line === '') {
        if (data.length) dispatch(type || 'message', data.join('\n'));
        type = '';
        data = [];
        continue;
      }
      if (line.startsWith(':')) continue;
      const colon = line.indexOf(':');
      const field = colon < 0 ? line : line.slice(0, colon);
      let val = colon < 0 ? '' : line.slice(colon + 1);
      if (val.startsWith(' ')) val = val.slice(1);
      if (field === 'event') type = val;
      else if (field === 'data') data.push(val);
    }
  }
}

function onEvent(type, text) {
  if (type !== 'forecast') return;
  let ev;
  try {
    ev = JSON.parse(text);
  } catch {
    return;
  }
  if (state.view.kind === 'overview') {
    announce(`New forecast for ${ev.gaugeId} issued ${fmtTime(ev.issueTime)}.`);
    void load();
  } else if (ev.gaugeId === state.view.id) {
    announce(`New forecast issued ${fmtTime(ev.issueTime)}.`);
    void load();
  }
}

// ---------- start ----------

function start() {
  state.token = takeToken();
  if (!state.token) showTokenForm('Enter a read token to see the data.');

  $('token-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const value = $('token-input').value.trim();
    if (!value) return;
    state.token = value;
    storage()?.setItem(TOKEN_KEY, value);
    $('token-input').value = '';
    $('token-message').textContent = 'checking…';
    state.dataKey = '';
    void load();
    void followEvents();
  });

  const refreshOnFocus = () => {
    if (document.visibilityState !== 'visible') return;
    const now = Date.now();
    if (now - state.lastFocusLoad < 5000) return;
    state.lastFocusLoad = now;
    void load();
  };
  window.addEventListener('focus', refreshOnFocus);
  document.addEventListener('visibilitychange', refreshOnFocus);

  let resizeTimer = 0;
  window.addEventListener('resize', () => {
    clearTimeout(resizeTimer);
    resizeTimer = setTimeout(drawCharts, 150);
  });

  state.lastFocusLoad = Date.now();
  void load();
  void followEvents();
}

start();
