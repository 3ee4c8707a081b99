// @ts-check
// Pictures of a gauge's verification as inline SVG, drawn from GET /gauges/:id/verification:
// the reliability diagram of a warning event (with consistency bars), its ROC curve, CRPS and
// CRPS skill per lead time with interval bands, and the PIT histogram. Each picture has a fixed
// viewBox and scales with its box, so nothing is redrawn on resize.
import { s } from './dom.js';
import { linearScale, linePath, niceTicks } from './scales.js';

/**
 * @typedef {'raw' | 'corrected' | 'stochastic'} SourceName
 * @typedef {{ value: number | null, low: number | null, high: number | null }} Scored
 * @typedef {{ lower: number, upper: number, count: number, meanForecast: number | null, observedFrequency: number | null, consistencyLow: number | null, consistencyHigh: number | null }} DiagramBin
 * @typedef {{ level: number | null, hitRate: number | null, falseAlarmRate: number | null }} RocPointJson
 * @typedef {{ lead: number, n: number, crps: Scored, crpsSkillClimatology: Scored, crpsSkillPersistence: Scored }} LeadSkill
 */

// One cool family: the published forecast darkest, the stages before it lighter, each with its
// own dash so they read apart without colour. No warm colours: nothing here is an alarm.
/** @type {Record<SourceName, { colour: string, dash: string, name: string }>} */
export const SOURCE_STYLES = {
  stochastic: { colour: '#15324a', dash: '', name: 'published (with error stage)' },
  corrected: { colour: '#2f6690', dash: '7 3', name: 'corrected members' },
  raw: { colour: '#6f9cc0', dash: '2 3', name: 'raw members' },
};
const BAR_COLOUR = '#4f86ad';
const GUIDE_COLOUR = '#9aabb7';

const W = 360;
const HGT = 300;
const M = { top: 14, right: 14, bottom: 42, left: 50 };

/**
 * Axes with ticks and titles on a [x0, x1] × [y0, y1] frame.
 * @param {(v: number) => number} x
 * @param {(v: number) => number} y
 * @param {[number, number]} xd
 * @param {[number, number]} yd
 * @param {string} xTitle
 * @param {string} yTitle
 * @param {(v: number) => string} [xFmt]
 */
function axes(x, y, xd, yd, xTitle, yTitle, xFmt = (v) => String(Math.round(v * 100) / 100)) {
  const xt = niceTicks(xd[0], xd[1], 5).ticks;
  const yt = niceTicks(yd[0], yd[1], 5).ticks;
  return s(
    'g',
    { class: 'axes' },
    yt.map((v) => s('line', { class: 'grid', x1: M.left, x2: W - M.right, y1: y(v), y2: y(v) })),
    s('line', { class: 'axis-line', x1: M.left, x2: W - M.right, y1: HGT - M.bottom, y2: HGT - M.bottom }),
    s('line', { class: 'axis-line', x1: M.left, x2: M.left, y1: M.top, y2: HGT - M.bottom }),
    xt.map((v) => s('text', { x: x(v), y: HGT - M.bottom + 15, 'text-anchor': 'middle' }, xFmt(v))),
    yt.map((v) => s('text', { x: M.left - 6, y: y(v) + 4, 'text-anchor': 'end' }, String(Math.round(v * 1000) / 1000))),
    s('text', { class: 'axis-title', x: (M.left + W - M.right) / 2, y: HGT - 6, 'text-anchor': 'middle' }, xTitle),
    s('text', { class: 'axis-title', x: 12, y: (M.top + HGT - M.bottom) / 2, 'text-anchor': 'middle', transform: `rotate(-90 12 ${(M.top + HGT - M.bottom) / 2})` }, yTitle),
  );
}

/**
 * @param {string} id
 * @param {string} label
 * @param {...import('./dom.js').Child} children
 */
function frame(id, label, ...children) {
  return s('svg', { id, viewBox: `0 0 ${W} ${HGT}`, role: 'img', 'aria-label': label }, ...children);
}

const unitX = () => linearScale(0, 1, M.left, W - M.right);
const unitY = () => linearScale(0, 1, HGT - M.bottom, M.top);

/**
 * Reliability diagram: observed frequency against forecast probability per bin; a vertical bar
 * shows where a reliable forecast's frequency would fall (consistency bars); dot area ∝ cases.
 * @param {DiagramBin[]} bins
 * @param {string} label
 */
export function reliabilityChart(bins, label) {
  const x = unitX();
  const y = unitY();
  const filled = bins.filter((b) => b.count > 0 && b.meanForecast !== null && b.observedFrequency !== null);
  const most = Math.max(1, ...filled.map((b) => b.count));
  return frame(
    'reliability-svg',
    label,
    axes(x, y, [0, 1], [0, 1], 'forecast probability', 'observed frequency'),
    s('line', { class: 'diagonal', x1: x(0), y1: y(0), x2: x(1), y2: y(1), stroke: GUIDE_COLOUR, 'stroke-dasharray': '4 3' }),
    s(
      'g',
      { class: 'consistency' },
      filled
        .filter((b) => b.consistencyLow !== null && b.consistencyHigh !== null)
        .map((b) => s('line', { x1: x(/** @type {number} */ (b.meanForecast)), x2: x(/** @type {number} */ (b.meanForecast)), y1: y(/** @type {number} */ (b.consistencyLow)), y2: y(/** @type {number} */ (b.consistencyHigh)), stroke: BAR_COLOUR, 'stroke-width': 6, 'stroke-opacity': 0.35, 'stroke-linecap': 'round' })),
    ),
    s('path', { class: 'reliability-line', d: linePath(filled.map((b) => x(/** @type {number} */ (b.meanForecast))), filled.map((b) => y(/** @type {number} */ (b.observedFrequency)))), fill: 'none', stroke: SOURCE_STYLES.stochastic.colour, 'stroke-width': 1.5 }),
    s(
      'g',
      { class: 'reliability-points' },
      filled.map((b) =>
        s(
          'circle',
          { cx: x(/** @type {number} */ (b.meanForecast)), cy: y(/** @type {number} */ (b.observedFrequency)), r: 2.5 + 5 * Math.sqrt(b.count / most), fill: SOURCE_STYLES.stochastic.colour, 'data-count': b.count },
          s('title', {}, `${Math.round(b.lower * 100)}–${Math.round(b.upper * 100)} %: ${b.count} cases, observed ${Math.round(/** @type {number} */ (b.observedFrequency) * 100)} %`),
        ),
      ),
    ),
  );
}

/**
 * ROC curves of the three forecasts for one event.
 * @param {{ source: SourceName, points: RocPointJson[] }[]} curves
 * @param {string} label
 */
export function rocChart(curves, label) {
  const x = unitX();
  const y = unitY();
  return frame(
    'roc-svg',
    label,
    axes(x, y, [0, 1], [0, 1], 'false-alarm rate', 'hit rate'),
    s('line', { class: 'diagonal', x1: x(0), y1: y(0), x2: x(1), y2: y(1), stroke: GUIDE_COLOUR, 'stroke-dasharray': '4 3' }),
    curves.map((c) => {
      const pts = c.points.filter((p) => p.hitRate !== null && p.falseAlarmRate !== null);
      const st = SOURCE_STYLES[c.source];
      return s('path', {
        class: `roc-line roc-${c.source}`,
        d: linePath(pts.map((p) => x(/** @type {number} */ (p.falseAlarmRate))), pts.map((p) => y(/** @type {number} */ (p.hitRate)))),
        fill: 'none',
        stroke: st.colour,
        'stroke-width': c.source === 'stochastic' ? 2.2 : 1.5,
        'stroke-dasharray': st.dash || null,
      });
    }),
  );
}

/**
 * A score per lead time for several series, each with its interval band.
 * @param {string} id
 * @param {string} label
 * @param {string} yTitle
 * @param {{ key: string, colour: string, dash: string, rows: { lead: number, score: Scored }[] }[]} series
 * @param {boolean} zeroLine
 */
export function perLeadChart(id, label, yTitle, series, zeroLine) {
  const leads = series.flatMap((sr) => sr.rows.map((r) => r.lead + 1));
  const vals = series.flatMap((sr) => sr.rows.flatMap((r) => [r.score.low, r.score.high, r.score.value])).filter((v) => v !== null && Number.isFinite(v));
  const l0 = Math.min(1, ...leads);
  const l1 = Math.max(l0 + 1, ...leads);
  let lo = Math.min(zeroLine ? 0 : Infinity, .../** @type {number[]} */ (vals));
  let hi = Math.max(zeroLine ? 0 : -Infinity, .../** @type {number[]} */ (vals));
  if (!Number.isFinite(lo) || !Number.isFinite(hi)) {
    lo = 0;
    hi = 1;
  }
  if (hi === lo) hi = lo + 1;
  const pad = (hi - lo) * 0.06;
  const x = linearScale(l0, l1, M.left, W - M.right);
  const y = linearScale(lo - pad, hi + pad, HGT - M.bottom, M.top);
  return s(
    'svg',
    { id, viewBox: `0 0 ${W} ${HGT}`, role: 'img', 'aria-label': label },
    axes(x, y, [l0, l1], [lo - pad, hi + pad], 'lead time (steps)', yTitle, (v) => String(Math.round(v))),
    zeroLine ? s('line', { class: 'zero', x1: M.left, x2: W - M.right, y1: y(0), y2: y(0), stroke: GUIDE_COLOUR }) : null,
    series.map((sr) => {
      const ok = sr.rows.filter((r) => r.score.value !== null);
      const band = ok.filter((r) => r.score.low !== null && r.score.high !== null);
      const xs = band.map((r) => x(r.lead + 1));
      const top = band.map((r) => y(/** @type {number} */ (r.score.high)));
      const bottom = band.map((r) => y(/** @type {number} */ (r.score.low)));
      const area = band.length > 1 ? `M${xs.map((v, i) => `${v},${top[i]}`).join('L')}L${xs.map((v, i) => `${v},${bottom[i]}`).reverse().join('L')}Z` : '';
      return s(
        'g',
        { class: `series series-${sr.key}` },
        area ? s('path', { class: 'interval-band', d: area, fill: sr.colour, 'fill-opacity': 0.16, stroke: 'none' }) : null,
        s('path', { class: 'score-line', d: linePath(ok.map((r) => x(r.lead + 1)), ok.map((r) => y(/** @type {number} */ (r.score.value)))), fill: 'none', stroke: sr.colour, 'stroke-width': 2, 'stroke-dasharray': sr.dash || null }),
      );
    }),
  );
}

/**
 * PIT histogram: counts per bin against the flat expectation of a calibrated forecast.
 * @param {number[]} counts
 * @param {number} expected
 */
export function pitChart(counts, expected) {
  const n = counts.length || 1;
  const x = linearScale(0, 1, M.left, W - M.right);
  const top = Math.max(expected, ...counts) * 1.1 || 1;
  const y = linearScale(0, top, HGT - M.bottom, M.top);
  return frame(
    'pit-svg',
    'PIT histogram of the published forecast',
    axes(x, y, [0, 1], [0, top], 'PIT', 'cases'),
    s(
      'g',
      { class: 'pit-bars' },
      counts.map((c, i) => s('rect', { x: x(i / n) + 1, width: Math.max(1, x(1 / n) - x(0) - 2), y: y(c), height: y(0) - y(c), fill: BAR_COLOUR, 'fill-opacity': 0.75, 'data-count': c })),
    ),
    s('line', { class: 'expected', x1: x(0), x2: x(1), y1: y(expected), y2: y(expected), stroke: SOURCE_STYLES.stochastic.colour, 'stroke-dasharray': '5 3' }),
  );
}
