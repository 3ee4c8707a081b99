import { beforeAll, describe, expect, it } from 'vitest';
import { buildScenario, type Scenario } from '../../src/scenario/scenario.ts';

// Plain-data part of a scenario (drops the two functions) for equality checks.
function data(s: Scenario) {
  const { forecastRun: _f, reforecasts: _r, ...rest } = s;
  return JSON.stringify(rest);
}

// The bounds in this file are design targets of the invented demo scenario (snow, a biased and too
// narrow raw ensemble, a few missing days), not outside values; they check the scenario does what
// it was built to do.

describe('demo scenario: layout and reproducibility', () => {
  it('the same seed gives identical data and forecasts, whatever order forecasts are asked in', () => {
    const a = buildScenario({ seed: 3, years: 4, members: 6 });
    const b = buildScenario({ seed: 3, years: 4, members: 6 });
    expect(data(a)).toBe(data(b));
    const a1 = a.forecastRun(100);
    const a2 = a.forecastRun(700);
    const b2 = b.forecastRun(700);
    const b1 = b.forecastRun(100);
    expect(b1).toEqual(a1);
    expect(b2).toEqual(a2);
    expect(a.forecastRun(100)).toEqual(a1);
  });

  it('another seed gives other weather and flows; the member count does not change the weather', () => {
    const a = buildScenario({ seed: 3, years: 4, members: 6 });
    const c = buildScenario({ seed: 4, years: 4, members: 6 });
    const d = buildScenario({ seed: 3, years: 4, members: 9 });
    expect(c.forcings.precipitation).not.toEqual(a.forcings.precipitation);
    expect(c.observedFlow).not.toEqual(a.observedFlow);
    expect(d.forcings).toEqual(a.forcings);
    expect(d.observedFlow).toEqual(a.observedFlow);
    expect(d.memberSimulations.p01).toEqual(a.memberSimulations.p01);
  });

  it('refuses bad options', () => {
    expect(() => buildScenario({ years: 1 })).toThrow(RangeError);
    expect(() => buildScenario({ members: 0 })).toThrow(RangeError);
    expect(() => buildScenario({ seed: -1 })).toThrow(RangeError);
    expect(() => buildScenario({ seed: 1.5 })).toThrow(RangeError);
  });
});

describe('demo scenario: 20 years, 40 members (default)', () => {
  let s: Scenario;
  beforeAll(() => {
    s = buildScenario();
  });

  it('has the documented layout', () => {
    const n = s.times.length;
    expect(n).toBe(7305); // 2005-01-01 … 2024-12-31, five leap years
    expect(s.times[0]).toBe('2005-01-01T00:00:00Z');
    expect(s.times[n - 1]).toBe('2024-12-31T00:00:00Z');
    expect(Date.parse(s.times[1]) - Date.parse(s.times[0])).toBe(86_400_000);
    expect(s.gauge).toMatchObject({ timeStep: 'P1D', timeZone: 'UTC', flowUnit: 'm3/s' });
    expect(s.gauge.id).toMatch(/^[a-z0-9-]+$/);
    const th = s.gauge.thresholds.map((t) => t.value);
    expect(th.length).toBe(3);
    // Thresholds named by their return period; the invented catchment has no coordinates.
    expect(s.gauge.thresholds.map((t) => t.label)).toEqual(['2-year flow', '10-year flow', '50-year flow']);
    expect(s.gauge.location).toBeNull();
    for (let k = 1; k < th.length; k++) expect(th[k]).toBeGreaterThan(th[k - 1]);
    expect(s.memberIds).toEqual(Array.from({ length: 40 }, (_, k) => `p${String(k + 1).padStart(2, '0')}`));
    for (const id of s.memberIds) expect(s.memberSimulations[id].length).toBe(n);
    expect(s.observedFlow.length).toBe(n);
    expect(s.forcings.precipitation.length).toBe(n);
    expect(s.forcings.air_temperature.length).toBe(n);
    expect(() => JSON.stringify(data(s))).not.toThrow();
  });

  it('observations have a few missing days as null and no non-finite numbers; all flows are non-negative', () => {
    const missing = s.observedFlow.filter((v) => v === null).length;
    expect(missing).toBeGreaterThan(5);
    expect(missing).toBeLessThan(0.02 * s.times.length);
    const finite = (v: number | null) => v === null || (Number.isFinite(v) && v >= 0);
    expect(s.observedFlow.every(finite)).toBe(true);
    for (const id of s.memberIds) expect(s.memberSimulations[id].every(finite)).toBe(true);
    expect(s.truth.flow.every(finite)).toBe(true);
    expect(s.forcings.precipitation.every(finite)).toBe(true);
  });

  it('has winter snow that melts in spring', () => {
    const monthMean = (a: number[], m: number) => {
      let sum = 0;
      let c = 0;
      s.times.forEach((t, i) => {
        if (Number(t.slice(5, 7)) === m) { sum += a[i]; c++; }
      });
      return sum / c;
    };
    const pack = (m: number) => monthMean(s.truth.snowpackMm, m);
    expect(pack(2)).toBeGreaterThan(50);
    expect(pack(5)).toBeLessThan(0.25 * pack(3));
    expect(pack(8)).toBeLessThan(1);
    // Melt makes April the high-flow month relative to mid-winter.
    expect(monthMean(s.truth.flow, 4)).toBeGreaterThan(2 * monthMean(s.truth.flow, 1));
    // Winter temperatures below freezing on average (snow needs them).
    expect(monthMean(s.forcings.air_temperature, 1)).toBeLessThan(0);
  });

  it('the raw ensemble is too narrow: min–max coverage of observations far below nominal', () => {
    // Nominal coverage of the min–max range of M exchangeable members is (M − 1)/(M + 1)
    // (rank-histogram argument, common practice): 39/41 ≈ 0.95 for 40 members.
    let inside = 0;
    let count = 0;
    let above = 0;
    for (let i = 0; i < s.times.length; i++) {
      const o = s.observedFlow[i];
      if (o === null) continue;
      let lo = Infinity;
      let hi = -Infinity;
      for (const id of s.memberIds) {
        const v = s.memberSimulations[id][i];
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
      count++;
      if (o >= lo && o <= hi) inside++;
      if (o > hi) above++;
    }
    expect(inside / count).toBeLessThan(0.4);
    expect(above / count).toBeGreaterThan(0.2);
  });

  it('the raw ensemble is biased low on floods: member annual maxima fall short of the truth', () => {
    const years = new Map<string, { truth: number; members: number[] }>();
    s.times.forEach((t, i) => {
      const y = t.slice(0, 4);
      const e = years.get(y) ?? { truth: 0, members: s.memberIds.map(() => 0) };
      e.truth = Math.max(e.truth, s.truth.flow[i]);
      s.memberIds.forEach((id, k) => (e.members[k] = Math.max(e.members[k], s.memberSimulations[id][i])));
      years.set(y, e);
    });
    let ratio = 0;
    let missedAbove = 0;
    for (const e of years.values()) {
      ratio += Math.max(...e.members) / e.truth;
      if (Math.max(...e.members) < e.truth) missedAbove++;
    }
    expect(ratio / years.size).toBeLessThan(0.85);
    expect(missedAbove).toBeGreaterThan(years.size / 2);
  });

  it('thresholds (Gumbel 2/10/50-year levels of the truth) are exceeded a plausible number of years', () => {
    const maxima = new Map<string, number>();
    s.times.forEach((t, i) => maxima.set(t.slice(0, 4), Math.max(maxima.get(t.slice(0, 4)) ?? 0, s.truth.flow[i])));
    const years = (v: number) => [...maxima.values()].filter((m) => m > v).length;
    const [t2, t10, t50] = s.gauge.thresholds.map((t) => t.value);
    // Expected counts in 20 years: 10, 2 and 0.4 (binomial 5–95 % ranges ≈ 6–14, 0–4, 0–1); loose bounds.
    expect(years(t2)).toBeGreaterThanOrEqual(4);
    expect(years(t2)).toBeLessThanOrEqual(16);
    expect(years(t10)).toBeLessThanOrEqual(6);
    expect(years(t50)).toBeLessThanOrEqual(3);
    expect(s.observedFlow.filter((o) => o !== null && o > t2).length).toBeGreaterThan(0);
  });

  it('forecast runs restart each member from its state at issue time, with warm-up values from its simulation', () => {
    const i = 4000;
    const run = s.forecastRun(i);
    expect(run.issueTime).toBe(s.times[i]);
    expect(run.times.length).toBe(s.warmupSteps + s.horizonSteps);
    expect(run.times[s.warmupSteps - 1]).toBe(s.times[i]);
    expect(run.times[s.warmupSteps]).toBe(s.times[i + 1]);
    expect(run.members.map((m) => m.id)).toEqual(s.memberIds);
    for (const m of run.members) {
      expect(m.warmupSteps).toBe(10);
      expect(m.values.slice(0, 10)).toEqual(s.memberSimulations[m.id].slice(i - 9, i + 1));
      expect(m.values.every((v) => Number.isFinite(v) && v >= 0)).toBe(true);
    }
    expect(run.forcings.precipitation.slice(0, 10)).toEqual(s.forcings.precipitation.slice(i - 9, i + 1));
    expect(run.forcings.air_temperature.slice(0, 10)).toEqual(s.forcings.air_temperature.slice(i - 9, i + 1));
    expect(run.forcings.precipitation.length).toBe(20);
    // Forecasts can be issued on the last day (future weather is generated beyond the record).
    expect(s.forecastRun(s.times.length - 1).members[0].values.length).toBe(20);
    expect(() => s.forecastRun(8)).toThrow(RangeError);
    expect(() => s.forecastRun(s.times.length)).toThrow(RangeError);
  });

  it('reforecasts are weekly, and forecast forcings and flows drift further from the truth with lead time', () => {
    const runs = s.reforecasts();
    expect(runs.length).toBeGreaterThan(150);
    for (let k = 1; k < runs.length; k++) expect(runs[k].issueTimeIndex - runs[k - 1].issueTimeIndex).toBe(7);
    const last = runs[runs.length - 1].issueTimeIndex;
    expect(last + s.horizonSteps).toBeLessThanOrEqual(s.times.length - 1);
    const tErr = new Array(s.horizonSteps).fill(0);
    const qErr = new Array(s.horizonSteps).fill(0);
    for (const r of runs) {
      for (let L = 1; L <= s.horizonSteps; L++) {
        const k = s.warmupSteps + L - 1;
        tErr[L - 1] += Math.abs(r.forcings.air_temperature[k] - s.forcings.air_temperature[r.issueTimeIndex + L]);
        const m = r.members[0];
        const sim = s.memberSimulations[m.id][r.issueTimeIndex + L];
        qErr[L - 1] += Math.abs(Math.log((m.values[k] + 0.01) / (sim + 0.01)));
      }
    }
    expect(tErr[9]).toBeGreaterThan(2 * tErr[0]);
    expect(qErr[9]).toBeGreaterThan(qErr[0]);
    expect(s.reforecasts({ fromIndex: 100, toIndex: 130, everySteps: 10 }).map((r) => r.issueTimeIndex)).toEqual([100, 110, 120, 130]);
  });
});
