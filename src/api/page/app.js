// @ts-check
// Forecast page: the overview of gauges at "/", one gauge at "/view/:id".
// Plain DOM and inline SVG; no framework. Data comes from the service's JSON reads
// (/overview, /gauges/:id/forecasts/latest) and live notices from /events.
// This module loads the view and starts the page; the others are named for what they hold:
// dom (element builders), format, page-state, service-requests, notices, scales, charts, views,
// live-events.
import { drawCharts } from './charts.js';
import { $, h, show } from './dom.js';
import { hideTokenForm, showTokenForm } from './notices.js';
import { state } from './page-state.js';
import { getJson, HttpError, keepToken, takeToken } from './service-requests.js';
import { followEvents } from './live-events.js';
import { renderGauge, renderNoForecast, renderOverview } from './views.js';

/**
 * Loads and shows the current view; calls made while loading run once more afterwards.
 * @returns {Promise<void>}
 */
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

/** Each gauge's time zone, read once per page (GET /gauges/:id). @type {Map<string, string>} */
const zones = new Map();

/** @param {string} id */
async function loadGauge(id) {
  let data;
  try {
    if (!zones.has(id)) {
      /** @type {{ timeZone?: string }} */
      const gauge = await getJson(`/gauges/${encodeURIComponent(id)}`);
      zones.set(id, gauge.timeZone ?? 'UTC');
    }
    state.timeZone = zones.get(id) ?? 'UTC';
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
  renderGauge(data, state.timeZone);
}

/**
 * @param {unknown} err
 * @param {string} what
 */
function showLoadError(err, what) {
  if (err instanceof HttpError && err.status === 401) {
    showTokenForm(state.token ? 'The token was refused; enter a valid read token.' : 'Enter a read token to see the data.');
    if (!state.data) show(h('p', { class: 'note' }, `A read token is needed to load ${what}.`));
    return;
  }
  const message = err instanceof Error ? err.message : String(err);
  const text = err instanceof HttpError ? `${err.status}: ${message}` : `the service did not answer (${message})`;
  const box = h('p', { class: 'problem', role: 'alert' }, `Could not load ${what}: ${text}`);
  if (state.data) {
    $('main').querySelector('.problem')?.remove();
    $('main').prepend(box); // keep the last good data visible below the message
  } else {
    show(box);
  }
}

function start() {
  state.token = takeToken();
  if (!state.token) showTokenForm('Enter a read token to see the data.');

  const tokenInput = /** @type {HTMLInputElement} */ ($('token-input'));
  $('token-form').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const value = tokenInput.value.trim();
    if (!value) return;
    state.token = value;
    keepToken(value);
    tokenInput.value = '';
    $('token-message').textContent = 'checking…';
    state.dataKey = '';
    void load();
    void followEvents(load);
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

  /** @type {number | undefined} */
  let resizeTimer;
  window.addEventListener('resize', () => {
    window.clearTimeout(resizeTimer);
    resizeTimer = window.setTimeout(drawCharts, 150);
  });

  state.lastFocusLoad = Date.now();
  void load();
  void followEvents(load);
}

start();
