// Writes the demo scenario as JSON to stdout, for inspection (the only file here doing I/O).
//   npx tsx src/scenario/dump-cli.ts [--seed 1] [--years 20] [--members 40] [--reforecasts] > scenario.json
import { buildScenario } from './scenario.ts';

const args = process.argv.slice(2);
const num = (name: string): number | undefined => {
  const k = args.indexOf(`--${name}`);
  return k >= 0 ? Number(args[k + 1]) : undefined;
};
const scenario = buildScenario({ seed: num('seed'), years: num('years'), members: num('members') });
const { forecastRun: _forecastRun, reforecasts, ...data } = scenario;
const out = args.includes('--reforecasts') ? { ...data, reforecasts: reforecasts() } : data;
process.stdout.write(`${JSON.stringify(out)}\n`);
