import type { Scenario } from './scenario.ts';

/**
 * "Today" in the demo: three days before the largest flood of the scenario's last three years,
 * so the latest forecast has something to say; the demo's archive ends today. Shared by the demo
 * and the script that writes the README's example run (examples/make-examples.ts).
 */
export function demoToday(scenario: Pick<Scenario, 'observedFlow'>): number {
  return floodEve(scenario.observedFlow, 3 * 365, 3);
}

/** The index `lead` days before the highest observed flow within the final `span` days. */
function floodEve(observed: (number | null)[], span: number, lead: number): number {
  let peak = observed.length - span;
  for (let i = peak; i < observed.length - 11; i++) if ((observed[i] ?? -1) > (observed[peak] ?? -1)) peak = i;
  return peak - lead;
}
