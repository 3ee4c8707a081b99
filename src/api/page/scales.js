// @ts-check
// Scales, ticks and path geometry shared by the page's two charts.
import { fmtClock, fmtDay, fmtLevel } from './format.js';

/** @typedef {import('./page-state.js').Forecast} Forecast */

/**
 * A time scale: milliseconds since 1970 to x pixels, with its domain and pixel range.
 * @typedef {((t: number) => number) & { domain: [number, number], range: [number, number] }} TimeScale
 */

// Shared by both charts; the right margin holds the threshold labels and is sized to them.
export const MARGIN = { top: 16, right: 150, bottom: 34, left: 56 };

// On narrow screens the labels move inside the plot (right-aligned, above their line) so the
// plot keeps most of the width.
export const LABELS = { inside: false };

/**
 * @param {Forecast} f
 * @param {number} width
 */
export function fitRightMargin(f, width) {
  const longest = Math.max(0, ...(f.thresholds ?? []).map((t) => `↑ ${t.label} ${fmtLevel(t.value)}`.length));
  const wanted = Math.min(180, Math.max(60, Math.round(longest * 7.2) + 16));
  LABELS.inside = wanted > width * 0.22;
  MARGIN.right = LABELS.inside ? 12 : wanted;
}

/** @param {string} iso */
export function ms(iso) {
  return new Date(iso).getTime();
}

/**
 * Shared x scale of both charts, so a lead time sits at the same place in each.
 * @param {Forecast} f
 * @param {number} width
 * @returns {TimeScale}
 */
export function timeScale(f, width) {
  const times = (f.validTimes ?? []).map(ms);
  const recent = (f.recent?.times ?? []).map(ms);
  const issue = ms(f.issueTime);
  const all = [...recent, issue, ...times].filter(Number.isFinite);
  const t0 = Math.min(...all);
  const t1 = Math.max(...all);
  const left = MARGIN.left;
  const right = width - MARGIN.right;
  const span = t1 > t0 ? t1 - t0 : 1;
  /** @param {number} t */
  const x = (t) => left + ((t - t0) / span) * (right - left);
  return Object.assign(x, { domain: /** @type {[number, number]} */ ([t0, t1]), range: /** @type {[number, number]} */ ([left, right]) });
}

/**
 * @param {number} d0
 * @param {number} d1
 * @param {number} r0
 * @param {number} r1
 * @returns {(v: number) => number}
 */
export function linearScale(d0, d1, r0, r1) {
  const k = (r1 - r0) / (d1 - d0 || 1);
  return (v) => r0 + (v - d0) * k;
}

/**
 * Round tick steps of 1, 2 or 5 × 10^k giving about `count` ticks.
 * @param {number} lo
 * @param {number} hi
 * @param {number} count
 */
export function niceTicks(lo, hi, count) {
  const raw = (hi - lo) / Math.max(1, count);
  const mag = 10 ** Math.floor(Math.log10(raw || 1));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((st) => raw <= st) ?? 10 * mag;
  const out = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
  return { ticks: out, step };
}

const HOUR = 3600e3;
const DAY = 24 * HOUR;

/**
 * @param {number} t0
 * @param {number} t1
 * @param {number} widthPx
 * @returns {{ t: number, text: string }[]}
 */
export function timeTicks(t0, t1, widthPx) {
  const max = Math.max(2, Math.floor(widthPx / 70));
  const steps = [HOUR, 3 * HOUR, 6 * HOUR, 12 * HOUR, DAY, 2 * DAY, 7 * DAY, 14 * DAY, 28 * DAY];
  const step = steps.find((st) => (t1 - t0) / st <= max) ?? steps[steps.length - 1];
  const out = [];
  // steps of a day or more start at the first midnight, shorter ones at multiples of the step
  const first = step >= DAY ? Math.ceil(t0 / DAY) * DAY : Math.ceil(t0 / step) * step;
  for (let t = first; t <= t1; t += step) out.push(t);
  /** @type {(t: number) => string} */
  const label = step >= DAY ? fmtDay : (t) => (t % DAY === 0 ? fmtDay(t) : fmtClock(t));
  return out.map((t) => ({ t, text: label(t) }));
}

/**
 * Path through the points, broken where a value is missing.
 * @param {number[]} xs
 * @param {number[]} ys
 */
export function linePath(xs, ys) {
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

/**
 * Closed band between a lower and an upper series, one polygon per unbroken run of values.
 * @param {number[]} xs
 * @param {number[]} lo
 * @param {number[]} hi
 */
export function bandPath(xs, lo, hi) {
  let d = '';
  /** @type {number[]} */
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

/**
 * Spreads label positions at least `gap` apart, keeping them inside [min, max].
 * @param {number[]} ys
 * @param {number} gap
 * @param {number} min
 * @param {number} max
 * @returns {number[]}
 */
export function spreadLabels(ys, gap, min, max) {
  const order = ys.map((y, i) => ({ y, i })).sort((a, b) => a.y - b.y);
  for (let k = 1; k < order.length; k++) order[k].y = Math.max(order[k].y, order[k - 1].y + gap);
  const over = order.length ? order[order.length - 1].y - max : 0;
  if (over > 0) for (const o of order) o.y -= over;
  for (let k = 0; k < order.length; k++) order[k].y = Math.max(order[k].y, min + k * gap);
  /** @type {number[]} */
  const out = new Array(ys.length);
  for (const o of order) out[o.i] = o.y;
  return out;
}
