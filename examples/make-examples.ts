// Writes the example run bodies of the README for the demo's gauge (`npm run demo`, the invented
// Corvane catchment): the raw run issued "today" in the demo, lead times only, as JSON and as CSV.
// The service takes the warm-up from its archive. Run: npx tsx examples/make-examples.ts
import { writeFileSync } from 'node:fs';
import { demoToday } from '../src/scenario/demo-today.ts';
import { buildScenario } from '../src/scenario/scenario.ts';

const scenario = buildScenario({ seed: 1 }); // the demo's scenario
const run = scenario.forecastRun(demoToday(scenario));
const w = run.warmupSteps;
const leads = (values: number[]) => values.slice(w);
const body = {
  issueTime: run.issueTime,
  source: 'example',
  unit: 'm3/s',
  members: run.members.map((m) => ({ id: m.id, values: leads(m.values) })),
  forcings: { precipitation: leads(run.forcings.precipitation), air_temperature: leads(run.forcings.air_temperature) },
};
const dir = new URL('./', import.meta.url);
// One member a line: short enough to read, and the same JSON.
const json = [
  '{',
  `  "issueTime": ${JSON.stringify(body.issueTime)},`,
  `  "source": ${JSON.stringify(body.source)},`,
  `  "unit": ${JSON.stringify(body.unit)},`,
  '  "members": [',
  body.members.map((m) => `    ${JSON.stringify(m)}`).join(',\n'),
  '  ],',
  `  "forcings": ${JSON.stringify(body.forcings)}`,
  '}',
].join('\n');
writeFileSync(new URL('run-leads-only.json', dir), `${json}\n`);
const lines = ['issue_time,member,lead_time,flow (m3/s),precipitation (mm),air_temperature (degC)'];
for (const m of body.members) m.values.forEach((v, k) => lines.push(`${body.issueTime},${m.id},P${k + 1}D,${v},${body.forcings.precipitation[k]},${body.forcings.air_temperature[k]}`));
writeFileSync(new URL('run-leads-only.csv', dir), `${lines.join('\n')}\n`);
console.log(`wrote examples/run-leads-only.json and .csv: issued ${body.issueTime}, ${body.members.length} members × ${body.members[0].values.length} lead times`);
