// Migration 005 renames the spread classes inside stored hindcast results and leaves everything else
// in them as it was. The old result below has the shape the hindcast job stored before the rename.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SPREAD_CLASSES } from '../../src/core/verification/spread-class.ts';
import { migrate, readMigrations } from '../../src/store/migrate.ts';
import { openTestDb, type TestDb } from '../helpers/test-db.ts';

const OLD_RULE =
  'coverage90 = share of PIT in [0.05, 0.95]; tolerance = max(0.03, 2·sqrt(0.09/n)); below 0.9 − tolerance: too-narrow; above 0.9 + tolerance: too-wide (conservative); else reliable';
const NEW_RULE =
  'coverage90 = share of PIT in [0.05, 0.95]; tolerance = max(0.03, 2·sqrt(0.09/n)); below 0.9 − tolerance: under-dispersive; above 0.9 + tolerance: over-dispersive; else calibrated';

const oldResult = {
  report: {
    raw: { spread: { class: 'too-narrow', n: 600, coverage90: 0.61, rule: OLD_RULE } },
    corrected: { spread: { class: 'too-wide (conservative)', n: 600, coverage90: 0.99, rule: OLD_RULE } },
    stochastic: { spread: { class: 'reliable', n: 600, coverage90: 0.9, rule: OLD_RULE } },
  },
  advice: {
    evidence: { spreadCorrected: 'too-wide (conservative)', spreadStochastic: 'reliable' },
    reasons: [
      'Spread: corrected too-wide (conservative) (90 % PIT coverage 0.990), stochastic reliable (0.900).',
      'Reliability and CRPS disagree; only the stochastic stage has a reliable spread, so it is preferred.',
      'Note: the corrected ensemble itself is not reliable (alpha 0.700); the residual model or the archive may need attention.',
    ],
  },
  warnings: ['a reliable note that is not a class stays as it is'],
};

let t: TestDb;
beforeAll(async () => {
  t = await openTestDb(readMigrations().filter((m) => m.version < 5));
});
afterAll(async () => t?.close());

describe('migration 005: spread class words', () => {
  it('rewrites the classes in stored hindcast results and nothing else', async () => {
    const insert = (kind: string, result: unknown) =>
      t.db.query<{ id: string }>(`insert into jobs (kind, params, status, result) values ($1, '{}'::jsonb, 'succeeded', $2::jsonb) returning id`, [kind, JSON.stringify(result)]);
    const hindcast = (await insert('hindcast', oldResult)).rows[0].id;
    const other = (await insert('fit', { note: 'too-narrow reliable' })).rows[0].id;
    const empty = (await t.db.query<{ id: string }>(`insert into jobs (kind, params) values ('hindcast', '{}'::jsonb) returning id`)).rows[0].id;

    expect(await migrate(t.db)).toContain('005_spread_class_words.sql');

    const read = async (id: string) => (await t.db.query<{ result: unknown }>('select result from jobs where id = $1', [id])).rows[0].result;
    expect(await read(hindcast)).toEqual({
      report: {
        raw: { spread: { class: 'under-dispersive', n: 600, coverage90: 0.61, rule: NEW_RULE } },
        corrected: { spread: { class: 'over-dispersive', n: 600, coverage90: 0.99, rule: NEW_RULE } },
        stochastic: { spread: { class: 'calibrated', n: 600, coverage90: 0.9, rule: NEW_RULE } },
      },
      advice: {
        evidence: { spreadCorrected: 'over-dispersive', spreadStochastic: 'calibrated' },
        reasons: [
          'Spread: corrected over-dispersive (90 % PIT coverage 0.990), stochastic calibrated (0.900).',
          'Reliability and CRPS disagree; only the stochastic stage has a calibrated spread, so it is preferred.',
          'Note: the corrected ensemble itself is not reliable (alpha 0.700); the residual model or the archive may need attention.',
        ],
      },
      warnings: ['a reliable note that is not a class stays as it is'],
    });
    expect(await read(other)).toEqual({ note: 'too-narrow reliable' });
    expect(await read(empty)).toBeNull();
    expect(SPREAD_CLASSES).toEqual(['under-dispersive', 'calibrated', 'over-dispersive']);
  });
});
