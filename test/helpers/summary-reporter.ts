import type { Reporter, TestModule } from 'vitest/node';
import { storeEnvKey } from './store-env.ts';

/** The store each project's tests ran on; postgres and page ask their global setup (postgres-setup.ts). */
function storeOf(project: string): string {
  if (project === 'compute') return 'no server (pure computation; a few use the embedded store in memory)';
  if (project === 'embedded') return 'embedded store (PGlite, in memory)';
  if (project === 'demo') return 'embedded store (PGlite) in a temporary data directory';
  return process.env[storeEnvKey(project)] ?? 'store unknown (its global setup did not run)';
}

/**
 * Ends the run with the store each project was tested on, then one plain line,
 * `tests: N passed, N failed, N skipped`, that any CI can read.
 */
export default class SummaryReporter implements Reporter {
  onTestRunEnd(modules: ReadonlyArray<TestModule>): void {
    const total = { passed: 0, failed: 0, skipped: 0 };
    const byProject = new Map<string, typeof total>();
    for (const m of modules) {
      const name = m.project.name || 'default';
      const counts = byProject.get(name) ?? { passed: 0, failed: 0, skipped: 0 };
      byProject.set(name, counts);
      let n = 0;
      for (const t of m.children.allTests()) {
        n++;
        const state = t.result().state;
        const key = state === 'passed' ? 'passed' : state === 'failed' ? 'failed' : 'skipped';
        counts[key]++;
        total[key]++;
      }
      if (m.state() === 'failed' && n === 0) {
        counts.failed++;
        total.failed++;
      }
    }
    const lines = ['', 'stores tested:'];
    const width = Math.max(...[...byProject.keys()].map((k) => k.length), 8);
    for (const [name, c] of [...byProject].sort(([a], [b]) => a.localeCompare(b))) {
      lines.push(`  ${name.padEnd(width)}  ${storeOf(name)}: ${c.passed} passed, ${c.failed} failed, ${c.skipped} skipped`);
    }
    const stores = [...byProject.keys()];
    if (!stores.includes('postgres')) lines.push(`  ${'postgres'.padEnd(width)}  not run: no PostgreSQL server tested in this run`);
    else if (/^FELL BACK/.test(storeOf('postgres'))) lines.push('  !! the postgres project fell back to the embedded store: NO PostgreSQL server was tested');
    lines.push(`tests: ${total.passed} passed, ${total.failed} failed, ${total.skipped} skipped`);
    console.log(lines.join('\n'));
  }
}
