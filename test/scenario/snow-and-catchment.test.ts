import { describe, expect, it } from 'vitest';
import { SNOW_FLUX, SNOW_FLUX_COUNT, createCemaNeige, cemaneigeStep, meanAnnualSnowfall, snowFraction } from '../../src/scenario/cemaneige.ts';
import { createCatchmentModel, initialCatchmentState, runCatchment } from '../../src/scenario/catchment-model.ts';
import { traceCatchment } from '../../src/scenario/catchment-trace.ts';
import { createVariates } from '../../src/scenario/random-variates.ts';
import { CLIMATE } from '../../src/scenario/scenario-setup.ts';
import { generateWeather } from '../../src/scenario/weather-generator.ts';

const total = (a: ArrayLike<number>): number => {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += a[i];
  return s;
};

// Ten invented years of weather from the scenario's generator (day 1 = 1 January).
function weather(years: number, seed: number) {
  const doy = new Int16Array(Math.round(years * 365));
  for (let i = 0; i < doy.length; i++) doy[i] = (i % 365) + 1;
  return { doy, w: generateWeather(createVariates(seed, 9), doy, CLIMATE) };
}

describe('CemaNeige (one layer)', () => {
  it('splits precipitation on the −1…3 °C ramp (Valéry et al. 2014, from memory)', () => {
    expect(snowFraction(-5)).toBe(1);
    expect(snowFraction(-1)).toBe(1);
    expect(snowFraction(1)).toBe(0.5);
    expect(snowFraction(3)).toBe(0);
    expect(snowFraction(10)).toBe(0);
  });

  it('refuses CTG outside [0, 1] and Kf outside [0, 12] mm/°C/d', () => {
    // CTG is a weighting coefficient, in [0, 1] by definition (Valéry et al. 2014). Kf: snow
    // degree-day factors compiled by Hock (2003, J. Hydrol. 282, "Temperature index melt modelling
    // in mountain areas") span about 2.5–11.6 mm/°C/d (from memory); 12 is the upper bound
    // we take from it, 15 lies outside.
    expect(() => createCemaNeige({ ctg: 1.2, kf: 3 }, 200)).toThrow(/CTG = 1.2/);
    expect(() => createCemaNeige({ ctg: 0.3, kf: -1 }, 200)).toThrow(/Kf = -1/);
    expect(() => createCemaNeige({ ctg: 0.3, kf: 15 }, 200)).toThrow(RangeError);
    expect(() => createCemaNeige({ ctg: 0.3, kf: 3 }, Number.NaN)).toThrow(RangeError);
  });

  it('no melt while the thermal state is below zero, melt once it reaches zero and T > 0 (melt rule, Valéry et al. 2014)', () => {
    const m = createCemaNeige({ ctg: 0.5, kf: 4 }, 100); // Gthreshold = 90 mm
    const state = new Float64Array([100, -4]);
    const flux = new Float64Array(SNOW_FLUX_COUNT);
    cemaneigeStep(m, state, 0, 0, 2, flux); // eTG = 0.5·(−4) + 0.5·2 = −1 → no melt
    expect(flux[SNOW_FLUX.melt]).toBe(0);
    expect(state[1]).toBe(-1);
    cemaneigeStep(m, state, 0, 0, 5, flux); // eTG = −0.5 + 2.5 = 2 → capped at 0, PotMelt = 4·5 = 20
    expect(state[1]).toBe(0);
    expect(flux[SNOW_FLUX.potentialMelt]).toBe(20);
    // G = 100 ≥ Gthreshold → Gratio = 1 → full melt (by hand).
    expect(flux[SNOW_FLUX.melt]).toBe(20);
    cemaneigeStep(m, state, 0, 0, 5, flux); // G = 80 < 90 → Gratio = 8/9 → Melt = (0.9·8/9 + 0.1)·20 = 18
    expect(flux[SNOW_FLUX.melt]).toBeCloseTo(18, 12);
  });

  it('conserves snow mass over ten years: Σ snowfall − Σ melt = final pack', () => {
    const { w } = weather(10, 3);
    const m = createCemaNeige({ ctg: 0.25, kf: 3.8 }, meanAnnualSnowfall(w.precipitation, w.airTemperature));
    const state = new Float64Array(2);
    const flux = new Float64Array(SNOW_FLUX_COUNT);
    let snowfall = 0;
    let melt = 0;
    let liquid = 0;
    for (let i = 0; i < w.precipitation.length; i++) {
      liquid += cemaneigeStep(m, state, 0, w.precipitation[i], w.airTemperature[i], flux);
      snowfall += flux[SNOW_FLUX.snowfall];
      melt += flux[SNOW_FLUX.melt];
    }
    expect(Math.abs(snowfall - melt - state[0]) / snowfall).toBeLessThan(1e-12);
    expect(Math.abs(total(w.precipitation) - liquid - state[0]) / total(w.precipitation)).toBeLessThan(1e-12);
  });
});

describe('snow + GR4J catchment model', () => {
  const params = { x1: 320, x2: -0.4, x3: 95, x4: 1.6, ctg: 0.25, kf: 3.8 };

  it('water balance closes to 1e-9 relative over 10 years, including snowpack and exchange', () => {
    // Perrin et al. (2003) balance with CemaNeige in front: Σ P = Σ AE + Σ Q + Δ(S + R + UH + G) − Σ exchange.
    const { w } = weather(10, 5);
    for (const x2 of [-0.4, -3, 2]) {
      const model = createCatchmentModel({ ...params, x2 }, meanAnnualSnowfall(w.precipitation, w.airTemperature));
      const tr = traceCatchment(model, initialCatchmentState(model), w);
      const n = w.precipitation.length - 1;
      const end = tr.snowpack[n] + tr.productionStore[n] + tr.routingStore[n] + tr.unitHydrographContent[n];
      const lhs = total(tr.precipitation);
      const rhs = total(tr.actualEvaporation) + total(tr.flow) + (end - tr.initialStorage) - total(tr.actualExchange);
      expect(Math.abs(lhs - rhs) / lhs).toBeLessThan(1e-9);
      expect(Math.min(...tr.flow)).toBeGreaterThanOrEqual(0);
    }
  });

  it('builds a winter snowpack that melts in spring, and spring flow exceeds winter flow', () => {
    const { doy, w } = weather(10, 5);
    const model = createCatchmentModel(params, meanAnnualSnowfall(w.precipitation, w.airTemperature));
    const tr = traceCatchment(model, initialCatchmentState(model), w);
    const byMonth = (a: Float64Array, first: number, last: number) => {
      let s = 0;
      let c = 0;
      for (let i = 365; i < a.length; i++) if (doy[i] >= first && doy[i] <= last) { s += a[i]; c++; }
      return s / c;
    };
    const febPack = byMonth(tr.snowpack, 32, 59);
    const junPack = byMonth(tr.snowpack, 152, 181);
    const augPack = byMonth(tr.snowpack, 213, 243);
    expect(febPack).toBeGreaterThan(30);
    expect(junPack).toBeLessThan(0.2 * febPack);
    expect(augPack).toBeLessThan(1);
    expect(total(tr.melt)).toBeGreaterThan(0);
    const aprFlow = byMonth(tr.flow, 91, 120);
    const janFlow = byMonth(tr.flow, 1, 31);
    expect(aprFlow).toBeGreaterThan(janFlow);
  });

  it('restarting from a checkpoint reproduces the continuous run exactly', () => {
    const { w } = weather(3, 8);
    const model = createCatchmentModel(params, meanAnnualSnowfall(w.precipitation, w.airTemperature));
    const n = w.precipitation.length;
    const full = new Float64Array(n);
    const store: Float64Array[] = [];
    runCatchment(model, initialCatchmentState(model), w, 0, n, full, { every: 32, store });
    const again = new Float64Array(n);
    const from = 32 * 17;
    runCatchment(model, store[17].slice(), w, from, n, again);
    expect(Array.from(again.subarray(from))).toEqual(Array.from(full.subarray(from)));
  });
});
