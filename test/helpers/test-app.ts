import type { FastifyBaseLogger, FastifyInstance, InjectOptions, LightMyRequestResponse } from 'fastify';
import { buildApp } from '../../src/api/app.ts';
import { createToken } from '../../src/api/tokens.ts';
import { loadConfig, type Config } from '../../src/config.ts';
import { openTestDb, type TestDb } from './test-db.ts';

export interface TestApp extends TestDb {
  app: FastifyInstance;
  config: Config;
  tokens: { admin: string; ingest: string; read: string };
  /** inject() with the given role's bearer token. */
  as(role: 'admin' | 'ingest' | 'read' | null, opts: InjectOptions): Promise<LightMyRequestResponse>;
}

export async function makeTestApp(env: Record<string, string> = {}, options: { logger?: FastifyBaseLogger } = {}): Promise<TestApp> {
  const store = await openTestDb();
  const config = loadConfig({ DATA_DIR: '/tmp/sft-test-unused', ...env });
  const app = await buildApp({ db: store.db, config, logger: options.logger });
  const tokens = {
    admin: (await createToken(store.db, 'admin', 'test admin')).token,
    ingest: (await createToken(store.db, 'ingest', 'test ingest')).token,
    read: (await createToken(store.db, 'read', 'test read')).token,
  };
  return {
    ...store,
    app,
    config,
    tokens,
    as(role, opts) {
      const headers = { ...(opts.headers ?? {}) } as Record<string, string>;
      if (role) headers.authorization = `Bearer ${tokens[role]}`;
      return app.inject({ ...opts, headers });
    },
    async close() {
      await app.close();
      await store.close();
    },
  };
}

export const riverGauge = {
  id: 'sample-brook-at-brennock-mill',
  name: 'Sample Brook at Brennock Mill',
  catchmentAreaKm2: 120.5,
  timeStep: 'P1D',
  timeZone: 'UTC',
  flowUnit: 'm3/s',
  // A point in the open North Atlantic: it exercises the field and lies in no real catchment.
  location: { latitude: 47.1, longitude: -35.2 },
  thresholds: [
    { label: '2-year flow', value: 40 },
    { label: '10-year flow', value: 65 },
    { label: '50-year flow', value: 90 },
  ],
};

/** Daily RFC 3339 times from a start date. */
export function dailyTimes(start: string, n: number): string[] {
  const t0 = Date.parse(start);
  return Array.from({ length: n }, (_, i) => new Date(t0 + i * 86_400_000).toISOString().replace('.000Z', 'Z'));
}
