// The demo gauge's archive as the fitting code sees it (what loadArchiveSeries returns after
// `npm run demo` loaded it), built straight from the invented scenario without a database.
import { buildScenario, type Scenario } from '../src/scenario/scenario.ts';
import type { ArchiveSeries, Period } from '../src/core/archive-types.ts';
import { defaultPeriods } from '../src/services/fit.ts';

/** The demo's "today": three days before the largest flood of the last three years (as src/scenario/demo.ts). */
export function demoToday(observed: (number | null)[]): number {
  const span = 3 * 365;
  let peak = observed.length - span;
  for (let i = peak; i < observed.length - 11; i++) if ((observed[i] ?? -1) > (observed[peak] ?? -1)) peak = i;
  return peak - 3;
}

export function demoSeries(): { scenario: Scenario; series: ArchiveSeries; today: number } {
  const scenario = buildScenario({ seed: 1 });
  const today = demoToday(scenario.observedFlow);
  const n = today + 1;
  const series: ArchiveSeries = {
    stepSeconds: 86400,
    times: Float64Array.from(scenario.times.slice(0, n), (t) => Date.parse(t)),
    observed: Float64Array.from(scenario.observedFlow.slice(0, n), (v) => (v === null ? NaN : v)),
    forcings: {
      air_temperature: Float64Array.from(scenario.forcings.air_temperature.slice(0, n)),
      precipitation: Float64Array.from(scenario.forcings.precipitation.slice(0, n)),
    },
    members: scenario.memberIds.map((id) => ({ id, values: Float64Array.from(scenario.memberSimulations[id].slice(0, n)) })),
  };
  return { scenario, series, today };
}

/** The fit job's default periods (src/services/fit.ts): the first 60 % of observed steps calibrate, the rest validate. */
export function demoPeriods(series: ArchiveSeries): { calibration: Period; validation: Period } {
  return defaultPeriods(series);
}
