// Timings of the demo scenario builder (printed, never asserted).
// Run: npx tsx bench/scenario.ts
import { buildScenario } from '../src/scenario/scenario.ts';

function time<T>(fn: () => T, repeat = 3): { ms: number; value: T } {
  let best = Infinity;
  let value!: T;
  for (let r = 0; r < repeat; r++) {
    const t0 = performance.now();
    value = fn();
    best = Math.min(best, performance.now() - t0);
  }
  return { ms: best, value };
}

const rows: { task: string; ms: string }[] = [];
for (const members of [30, 50]) {
  const { ms, value: s } = time(() => buildScenario({ seed: 1, years: 20, members }));
  rows.push({ task: `buildScenario 20 y × ${members} members`, ms: ms.toFixed(1) });
  const last = s.times.length - 1;
  rows.push({ task: `forecastRun (${members} members, last day)`, ms: time(() => s.forecastRun(last), 20).ms.toFixed(2) });
  const rf = time(() => s.reforecasts(), 1);
  rows.push({ task: `reforecasts weekly, 3 y (${rf.value.length} runs, ${members} members)`, ms: rf.ms.toFixed(1) });
}
console.table(rows);
