// @ts-check
// What the forecast page holds between loads: the view, the token, the data shown, load and
// live-event bookkeeping. One object shared by the page's modules.

/**
 * One corrected run as GET /gauges/:id/forecasts/latest answers it.
 * @typedef {import('../../services/forecast-view.ts').ForecastView} Forecast
 * @typedef {Forecast['thresholds'][number]} ThresholdForecast
 */

/**
 * One gauge of GET /overview.
 * @typedef {object} OverviewGauge
 * @property {string} id
 * @property {string} name
 * @property {string} [timeZone]  IANA zone the page shows the gauge's times in
 * @property {string} status
 * @property {{ id: string, issueTime: string, status: string } | null} latest
 * @property {{ label: string, value: number, maxExceedance: number | null, anyTime: number | null, attention: boolean }[]} thresholds
 */

/**
 * GET /overview.
 * @typedef {object} Overview
 * @property {string} caution
 * @property {OverviewGauge[]} gauges
 */

/** @typedef {{ kind: 'overview' } | { kind: 'gauge', id: string }} View */

/**
 * @param {string} path
 * @returns {View}
 */
export function parseView(path) {
  const m = /^\/view\/([^/]+)\/?$/.exec(path);
  if (m) return { kind: 'gauge', id: decodeURIComponent(m[1]) };
  return { kind: 'overview' };
}

/**
 * @typedef {object} PageState
 * @property {string | null} token
 * @property {View} view
 * @property {Forecast | Overview | null} data  what is shown: a forecast on a gauge view, the overview otherwise
 * @property {string} dataKey  the JSON of `data`, so an unchanged answer is not drawn again
 * @property {string} timeZone  the shown gauge's IANA time zone (UTC until known)
 * @property {boolean} showRaw
 * @property {Promise<void> | null} loading
 * @property {boolean} again
 * @property {number} lastFocusLoad
 * @property {{ generation: number, stop: (() => void) | null, connectedOnce: boolean, lastEventId: string }} events  the live stream: `stop` closes the open one; `lastEventId` is where a new one resumes
 */

/** @type {PageState} */
export const state = {
  token: null,
  view: parseView(location.pathname),
  data: null,
  dataKey: '',
  timeZone: 'UTC',
  showRaw: false,
  loading: null,
  again: false,
  lastFocusLoad: 0,
  events: { generation: 0, stop: null, connectedOnce: false, lastEventId: '' },
};
