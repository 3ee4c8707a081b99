// Nelder–Mead simplex minimiser (Nelder & Mead 1965) with the usual coefficients
// (reflection 1, expansion 2, contraction 1/2, shrink 1/2). Gradient-free and robust to the
// occasional -Infinity / NaN objective (treated as +Infinity).

export interface NelderMeadOptions {
  /** Initial simplex step per coordinate (default 0.1 times max(1, |x|)). */
  step?: number | ArrayLike<number>;
  maxEvaluations?: number;
  /** Stop when the spread of values in the simplex falls below this. */
  valueTolerance?: number;
  /** …and the simplex is smaller than this in every coordinate. */
  pointTolerance?: number;
}

export interface NelderMeadResult {
  x: Float64Array;
  value: number;
  evaluations: number;
}

export function nelderMead(
  f: (x: Float64Array) => number,
  start: ArrayLike<number>,
  options: NelderMeadOptions = {},
): NelderMeadResult {
  const d = start.length;
  const maxEval = options.maxEvaluations ?? 200 * d;
  const fTol = options.valueTolerance ?? 1e-10;
  const xTol = options.pointTolerance ?? 1e-8;
  let evaluations = 0;
  const evaluate = (x: Float64Array): number => {
    evaluations++;
    const v = f(x);
    return Number.isNaN(v) || v === -Infinity ? Infinity : v;
  };
  const pts: Float64Array[] = [];
  const vals = new Float64Array(d + 1);
  for (let i = 0; i <= d; i++) {
    const p = Float64Array.from(start);
    if (i > 0) {
      const s = options.step;
      const base = typeof s === 'number' ? s : s !== undefined ? s[i - 1] : 0.1 * Math.max(1, Math.abs(p[i - 1]));
      p[i - 1] += base;
    }
    pts.push(p);
    vals[i] = evaluate(p);
  }
  const order = Array.from({ length: d + 1 }, (_, i) => i);
  const centroid = new Float64Array(d);
  const xr = new Float64Array(d);
  const xe = new Float64Array(d);
  const xc = new Float64Array(d);
  const along = (t: number, out: Float64Array, worst: Float64Array): void => {
    for (let k = 0; k < d; k++) out[k] = centroid[k] + t * (worst[k] - centroid[k]);
  };
  while (evaluations < maxEval) {
    order.sort((a, b) => vals[a] - vals[b]);
    const best = order[0];
    const worst = order[d];
    const second = order[d - 1];
    let size = 0;
    for (let i = 1; i <= d; i++) {
      for (let k = 0; k < d; k++) size = Math.max(size, Math.abs(pts[order[i]][k] - pts[best][k]));
    }
    if (Math.abs(vals[worst] - vals[best]) <= fTol && size <= xTol) break;
    centroid.fill(0);
    for (let i = 0; i < d; i++) for (let k = 0; k < d; k++) centroid[k] += pts[order[i]][k] / d;
    along(-1, xr, pts[worst]);
    const fr = evaluate(xr);
    if (fr < vals[best]) {
      along(-2, xe, pts[worst]);
      const fe = evaluate(xe);
      if (fe < fr) { pts[worst].set(xe); vals[worst] = fe; } else { pts[worst].set(xr); vals[worst] = fr; }
    } else if (fr < vals[second]) {
      pts[worst].set(xr);
      vals[worst] = fr;
    } else {
      const outside = fr < vals[worst];
      along(outside ? -0.5 : 0.5, xc, pts[worst]);
      const fc = evaluate(xc);
      if (fc < (outside ? fr : vals[worst])) {
        pts[worst].set(xc);
        vals[worst] = fc;
      } else {
        for (let i = 1; i <= d; i++) {
          const p = pts[order[i]];
          for (let k = 0; k < d; k++) p[k] = pts[best][k] + 0.5 * (p[k] - pts[best][k]);
          vals[order[i]] = evaluate(p);
        }
      }
    }
  }
  let bi = 0;
  for (let i = 1; i <= d; i++) if (vals[i] < vals[bi]) bi = i;
  return { x: Float64Array.from(pts[bi]), value: vals[bi], evaluations };
}
