import type { Scenario } from './scenario.ts';

/** Sends one request to the service and returns its status and JSON body. */
export type Send = (method: 'GET' | 'POST' | 'PATCH', url: string, body?: unknown) => Promise<{ status: number; body: unknown }>;

async function expectOk(send: Send, method: 'POST' | 'PATCH', url: string, body: unknown, ok: number[] = [200, 201]): Promise<unknown> {
  const res = await send(method, url, body);
  if (!ok.includes(res.status)) throw new Error(`${method} ${url} answered ${res.status}: ${JSON.stringify(res.body)}`);
  return res.body;
}

/**
 * Loads the scenario's gauge and archive through the public API, exactly as an operator would:
 * gauge, forcings, observed flow, member simulations, and reforecasts when asked. Re-running it
 * changes nothing (every write is an upsert).
 */
export async function loadScenarioArchive(
  send: Send,
  scenario: Scenario,
  options: { reforecasts?: boolean; onStep?: (what: string) => void; /** Last time index loaded (default: all). */ endIndex?: number } = {},
): Promise<void> {
  const end = (options.endIndex ?? scenario.times.length - 1) + 1;
  const times = scenario.times.slice(0, end);
  const cut = <T>(values: T[]) => values.slice(0, end);
  const g = scenario.gauge;
  const step = options.onStep ?? (() => {});
  const gauge = {
    name: g.name,
    catchmentAreaKm2: g.catchmentAreaKm2,
    timeStep: g.timeStep,
    timeZone: g.timeZone,
    flowUnit: g.flowUnit,
    location: null,
    thresholds: g.thresholds.map((t) => ({ label: t.label, value: t.value })),
  };
  const existing = await send('GET', `/gauges/${g.id}`);
  if (existing.status === 404) await expectOk(send, 'POST', '/gauges', { id: g.id, ...gauge });
  else await expectOk(send, 'PATCH', `/gauges/${g.id}`, gauge);
  step('gauge');

  await expectOk(send, 'POST', `/gauges/${g.id}/forcings`, {
    times,
    variables: [
      { name: 'precipitation', unit: 'mm', values: cut(scenario.forcings.precipitation) },
      { name: 'air_temperature', unit: 'degC', values: cut(scenario.forcings.air_temperature) },
    ],
  });
  step('forcings');
  await expectOk(send, 'POST', `/gauges/${g.id}/observations`, { unit: 'm3/s', times, values: cut(scenario.observedFlow) });
  step('observed flow');
  // Members in batches of ten keep each request a few MB.
  for (let i = 0; i < scenario.memberIds.length; i += 10) {
    const ids = scenario.memberIds.slice(i, i + 10);
    await expectOk(send, 'POST', `/gauges/${g.id}/simulations`, {
      unit: 'm3/s',
      times,
      members: ids.map((id) => ({ id, values: cut(scenario.memberSimulations[id]) })),
    });
  }
  step('member simulations');
  if (options.reforecasts) {
    const runs = scenario.reforecasts().filter((r) => r.issueTimeIndex + r.horizonSteps < end);
    for (let i = 0; i < runs.length; i += 20) {
      await expectOk(send, 'POST', `/gauges/${g.id}/reforecasts`, {
        unit: 'm3/s',
        runs: runs.slice(i, i + 20).map((r) => ({
          issueTime: r.issueTime,
          members: r.members.map((m) => ({ id: m.id, values: m.values.slice(m.warmupSteps) })),
          // The forecast forcings each run was driven by at its lead times.
          forcings: { precipitation: r.forcings.precipitation.slice(r.warmupSteps), air_temperature: r.forcings.air_temperature.slice(r.warmupSteps) },
        })),
      });
    }
    step('reforecasts');
  }
}
