import { describe, expect, it } from 'vitest';
import { readFileSync } from 'node:fs';
import { createStochasticWorkspace, runStochasticStage } from '../../src/core/stochastic/stochastic-stage.ts';
import { stageCases, stageDigest } from '../fixtures/stage-outputs/cases.ts';

// Regression check, not an outside source: the outputs were written by
// test/fixtures/stage-outputs/make-stage-outputs.ts with the stage as it stood before the speed
// work (commit b0e3982; remade with the stage of commit 6c3bb1a on main, whose lead scale changed; the
// uniform-kernel case remade for its window path, which draws the same neighbours with the same
// probabilities in another order — test/core/knn-window.test.ts — while its "walked" twin keeps the old numbers). Everything is seeded, so a faster implementation must give the same
// numbers bit for bit.
const fixture = JSON.parse(readFileSync(new URL('../fixtures/stage-outputs/stage-outputs.json', import.meta.url), 'utf8')) as { cases: ({ name: string } & ReturnType<typeof stageDigest>)[] };

describe('stochastic stage outputs unchanged on fixed seeds', () => {
  const cases = stageCases();
  it('covers every case of the fixture', () => {
    expect(cases.map((c) => c.name)).toEqual(fixture.cases.map((c) => c.name));
  });
  // One workspace for all cases, as a worker reuses it between runs of different sizes.
  const ws = createStochasticWorkspace();
  for (const c of cases) {
    it(c.name, () => {
      const { name, ...want } = fixture.cases.find((f) => f.name === c.name)!;
      expect(name).toBe(c.name);
      expect(stageDigest(runStochasticStage(c.archive, c.input, c.options, ws))).toEqual(want);
    });
  }
});
