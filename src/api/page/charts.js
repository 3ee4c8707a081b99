// @ts-check
// The gauge page's two charts as inline SVG: the flow fan chart (bands, members, median,
// observations, thresholds) and the chance of exceeding each threshold by valid time.
import { h, s } from './dom.js';
import { finite, fmtFlow, fmtLead, fmtLevel, fmtProb, fmtTick, fmtTime, UNIT } from './format.js';
import { state } from './page-state.js';
import { bandPath, fitRightMargin, LABELS, linearScale, linePath, MARGIN, ms, niceTicks, spreadLabels, timeScale, timeTicks } from './scales.js';

/**
 * @typedef {import('./page-state.js').Forecast} Forecast
 * @typedef {import('./page-state.js').ThresholdForecast} ThresholdForecast
 * @typedef {import('./scales.js').TimeScale} TimeScale
 * @typedef {'circle' | 'square' | 'triangle' | 'diamond' | 'cross'} MarkerKind
 */

// Thresholds all share one dark teal (6:1 on white), apart from the forecast's blue; a dash pattern
// and a marker per threshold tell them apart, and every legend names each one with its value. No
// colour ranks them, so nothing reads as an alarm scale.
const THRESHOLD_COLOUR = '#0f6b66';
/** @type {{ colour: string, dash: string, marker: MarkerKind }[]} */
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

/** Draws (or redraws, on resize and the raw toggle) both charts of the gauge shown. */
export function drawCharts() {
  if (!state.data || state.view.kind !== 'gauge') return;
  const f = /** @type {Forecast} */ (state.data);
  const flowBox = document.getElementById('flow-chart');
  if (!flowBox) return;
  const width = Math.max(300, Math.floor(flowBox.clientWidth || 800));
  fitRightMargin(f, width);
  const scaleX = timeScale(f, width);
  flowBox.replaceChildren(flowChart(f, width, scaleX));
  const legend = flowBox.parentElement?.querySelector('figcaption');
  legend?.replaceChildren(flowLegend(f));
  const probBox = document.getElementById('prob-chart');
  if (probBox) probBox.replaceChildren(probChart(f, width, scaleX));
}

/**
 * A threshold label at height y: in the right margin, or inside the plot's right edge.
 * @param {TimeScale} x
 * @param {number} y
 * @param {string} colour
 * @param {string} text
 */
function thresholdLabel(x, y, colour, text) {
  return LABELS.inside
    ? s('text', { class: 'threshold-label', x: x.range[1] - 4, y, fill: colour, 'text-anchor': 'end' }, text)
    : s('text', { class: 'threshold-label', x: x.range[1] + 10, y, fill: colour }, text);
}

/**
 * The line style (dash and marker) of the i-th threshold, for legends and tables.
 * @param {number} i
 */
export function swatch(i) {
  const st = THRESHOLD_STYLES[i % THRESHOLD_STYLES.length];
  return s(
    'svg',
    { class: 'swatch', width: 26, height: 12, 'aria-hidden': 'true', focusable: 'false' },
    s('line', { x1: 1, x2: 25, y1: 6, y2: 6, stroke: st.colour, 'stroke-width': 2.5, 'stroke-dasharray': st.dash || null }),
    marker(st.marker, 13, 6, st.colour),
  );
}

/** @param {Forecast} f */
export function flowLegend(f) {
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

/**
 * @param {SVGElement} shape
 * @param {string} text
 */
function legendItem(shape, text) {
  return h('li', {}, s('svg', { width: 22, height: 12, 'aria-hidden': 'true', focusable: 'false' }, shape), ' ', text);
}

/**
 * Row of the quantile table holding probability p, or −1.
 * @param {number[]} probs
 * @param {number} p
 */
export function findProb(probs, p) {
  return probs.findIndex((x) => Math.abs(x - p) < 1e-9);
}

/**
 * @param {TimeScale} x
 * @param {number} y0
 * @param {number} height
 */
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

/**
 * @param {Forecast} f
 * @param {number} width
 * @param {TimeScale} x
 */
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
  /** @param {ArrayLike<number | null> | null | undefined} arr */
  const take = (arr) => {
    for (const v of Array.from(arr ?? [])) if (finite(v) && v > dataMax) dataMax = v;
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
  svg.append(s('title', { id: titleId }, `Forecast flow at ${f.gaugeName ?? f.gaugeId}, issued ${fmtTime(f.issueTime, state.timeZone)}`));
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

/**
 * @param {Forecast} f
 * @param {number[]} probs
 * @param {number[][]} q
 * @param {ThresholdForecast[]} thresholds
 */
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
/**
 * @param {SVGSVGElement} svg
 * @param {Forecast} f
 * @param {number[]} xs
 * @param {number} y0
 */
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
    guide.setAttribute('x1', String(xs[j]));
    guide.setAttribute('x2', String(xs[j]));
    guide.setAttribute('visibility', 'visible');
    lines[0].textContent = `${fmtLead(f.leadTimes[j])} · ${fmtTime(f.validTimes[j], state.timeZone)}`;
    lines[1].textContent = iMed >= 0 ? `median ${fmtFlow(q[iMed][j])} ${UNIT}` : '';
    lines[2].textContent = iLo >= 0 && iHi >= 0 ? `5–95 %: ${fmtFlow(q[iLo][j])} – ${fmtFlow(q[iHi][j])}` : '';
    thresholds.forEach((t, k) => {
      lines[3 + k].textContent = `> ${t.label}: ${fmtProb(t.exceedance?.[j])}`;
    });
    const w = 190;
    const bx = xs[j] + w + 12 > svg.viewBox.baseVal.width - 4 ? xs[j] - w - 8 : xs[j] + 8;
    box.setAttribute('transform', `translate(${bx},${MARGIN.top + 4})`);
    bg.setAttribute('width', String(w));
    bg.setAttribute('height', String(10 + lines.length * 15));
    box.setAttribute('visibility', 'visible');
  });
  svg.addEventListener('pointerleave', () => {
    guide.setAttribute('visibility', 'hidden');
    box.setAttribute('visibility', 'hidden');
  });
}

/**
 * @param {MarkerKind} kind
 * @param {number} cx
 * @param {number} cy
 * @param {string} colour
 */
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

/**
 * @param {Forecast} f
 * @param {number} width
 * @param {TimeScale} x
 */
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

  /** @type {{ i: number, t: ThresholdForecast, y: number }[]} */
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

