import { chmodSync, existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { createToken, hashToken } from '../api/tokens.ts';
import type { Queryable } from '../store/db.ts';
import { findTokenByHash, type Role } from '../store/tokens-repo.ts';

export type DemoTokens = Record<Role, string>;

/** One variable per role, in the order a newcomer needs them. */
const VARIABLES: [Role, string][] = [
  ['read', 'READ_TOKEN'],
  ['ingest', 'INGEST_TOKEN'],
  ['admin', 'ADMIN_TOKEN'],
];

export function demoTokensPath(dataDir: string): string {
  return join(resolve(dataDir), 'demo-tokens.env');
}

/**
 * One token per role for the demo, kept in a file only its owner may read (0600) under the data
 * directory, as shell lines (`. data/demo-tokens.env` exports them). A second start reuses the
 * tokens in the file that are still active with their role and makes new ones for the rest.
 */
export async function demoTokens(db: Queryable, dataDir: string): Promise<{ path: string; tokens: DemoTokens; made: Role[] }> {
  const path = demoTokensPath(dataDir);
  const previous = existsSync(path) ? readTokenFile(readFileSync(path, 'utf8')) : {};
  const tokens = {} as DemoTokens;
  const made: Role[] = [];
  for (const [role] of VARIABLES) {
    const old = previous[role];
    const row = old ? await findTokenByHash(db, hashToken(old)) : null;
    if (old && row?.role === role) tokens[role] = old;
    else {
      tokens[role] = (await createToken(db, role, `demo ${role}`)).token;
      made.push(role);
    }
  }
  if (made.length || !existsSync(path)) writeTokenFile(path, tokens);
  chmodSync(path, 0o600);
  return { path, tokens, made };
}

function readTokenFile(text: string): Partial<DemoTokens> {
  const found: Partial<DemoTokens> = {};
  for (const [role, name] of VARIABLES) {
    const m = new RegExp(`^export ${name}=(\\S+)$`, 'm').exec(text);
    if (m) found[role] = m[1];
  }
  return found;
}

/** Written to a new 0600 file and renamed over the old one, so the secrets are never readable by others. */
function writeTokenFile(path: string, tokens: DemoTokens): void {
  mkdirSync(join(path, '..'), { recursive: true });
  const lines = [
    '# Access tokens the demo made, one per role; keep this file private.',
    '# Load them into a shell with:  . ' + path,
    ...VARIABLES.map(([role, name]) => `export ${name}=${tokens[role]}`),
    '',
  ];
  const temporary = `${path}.${process.pid}.tmp`;
  writeFileSync(temporary, lines.join('\n'), { mode: 0o600, flag: 'wx' });
  renameSync(temporary, path);
}
