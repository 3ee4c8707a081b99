// `npm run token -- create|list|revoke`: manages access tokens. With a PostgreSQL server
// (DATABASE_URL) it opens the database like the service does. With the embedded store it asks the
// running service over its control socket (src/api/control-socket.ts), because the store may be open
// in one process only; when no service runs, it opens the store itself. Every failure is one plain
// message on stderr and exit status 1, never a stack trace.
import { existsSync } from 'node:fs';
import { parseArgs } from 'node:util';
import { ConfigError, loadConfig, type Config } from '../config.ts';
import { DataDirLockedError } from '../store/embedded-driver.ts';
import { migrate } from '../store/migrate.ts';
import { openDb } from '../store/open.ts';
import { revokeToken, type Role } from '../store/tokens-repo.ts';
import { askControlSocket, controlSocketPath } from './control-socket.ts';
import { createToken, listedTokens, ROLES, type TokenListed } from './tokens.ts';

const usage = `usage:
  npm run token -- create --role admin|ingest|read [--name NAME]
  npm run token -- list
  npm run token -- revoke ID`;

/** What the command needs, whichever way it reaches the store. */
interface TokenStore {
  create(role: Role, name: string): Promise<{ id: string; token: string }>;
  list(): Promise<TokenListed[]>;
  revoke(id: string): Promise<boolean>;
  close(): Promise<void>;
}

class CommandError extends Error {}

async function main(): Promise<void> {
  let parsed;
  try {
    parsed = parseArgs({ allowPositionals: true, options: { role: { type: 'string' }, name: { type: 'string' } } });
  } catch (err) {
    console.error(`${(err as Error).message}\n${usage}`);
    process.exit(2);
  }
  const { positionals, values } = parsed;
  const [command, arg] = positionals;
  if (!command || !['create', 'list', 'revoke'].includes(command)) {
    console.error(usage);
    process.exit(2);
  }
  if (command === 'create' && !(ROLES as readonly string[]).includes(values.role ?? '')) {
    console.error(`--role must be admin, ingest or read\n${usage}`);
    process.exit(2);
  }
  if (command === 'revoke' && !arg) {
    console.error(`revoke needs the token's id (see npm run token -- list)\n${usage}`);
    process.exit(2);
  }

  const config = loadConfig();
  const store = await openTokenStore(config);
  try {
    if (command === 'create') {
      const role = values.role as Role;
      const { id, token } = await store.create(role, values.name ?? `${role} token`);
      console.log(`token ${id} (${role}) created; it is shown only this once:\n${token}`);
    } else if (command === 'list') {
      for (const t of await store.list()) {
        console.log(`${t.id}  ${t.role.padEnd(6)}  ${t.revokedAt ? 'revoked' : 'active '}  ${t.name}`);
      }
    } else {
      console.log((await store.revoke(arg)) ? `revoked ${arg}` : `no active token ${arg}`);
    }
  } finally {
    await store.close();
  }
}

async function openTokenStore(config: Config): Promise<TokenStore> {
  if (!config.DATABASE_URL) {
    const socket = controlSocketPath(config.DATA_DIR);
    if (existsSync(socket)) {
      const viaService = await serviceStore(socket);
      if (viaService) return viaService;
    }
  }
  let db;
  try {
    db = await openDb({ databaseUrl: config.DATABASE_URL, dataDir: config.DATA_DIR });
  } catch (err) {
    if (err instanceof DataDirLockedError) {
      throw new CommandError(
        `${err.message}\nThat process offers no control socket at ${controlSocketPath(config.DATA_DIR)} ` +
          '(it may still be starting: try again in a few seconds; else see its log), ' +
          'or create tokens over HTTP: POST /tokens with an admin token.',
      );
    }
    if (config.DATABASE_URL) throw new CommandError(`cannot reach the PostgreSQL server at ${serverName(config.DATABASE_URL)}: ${(err as Error).message}`);
    throw err;
  }
  try {
    await migrate(db);
  } catch (err) {
    await db.close();
    throw err;
  }
  return {
    create: (role, name) => createToken(db, role, name),
    list: () => listedTokens(db),
    revoke: (id) => revokeToken(db, id),
    close: () => db.close(),
  };
}

/** The running service's control socket, or null when nothing answers on it (a dead service's file). */
async function serviceStore(socket: string): Promise<TokenStore | null> {
  try {
    await askControlSocket(socket, 'GET', '/tokens');
  } catch (err) {
    const code = (err as NodeJS.ErrnoException).code;
    if (code === 'ECONNREFUSED' || code === 'ENOENT') return null;
    throw new CommandError(`the running service did not answer on ${socket}: ${(err as Error).message}`);
  }
  const check = <T>(r: { status: number; body: any }, ok: number): T => {
    if (r.status !== ok) throw new CommandError(`the service refused: ${r.body?.detail ?? `status ${r.status}`}`);
    return r.body as T;
  };
  return {
    async create(role, name) {
      return check<{ id: string; token: string }>(await askControlSocket(socket, 'POST', '/tokens', { role, name }), 201);
    },
    async list() {
      return check<{ tokens: TokenListed[] }>(await askControlSocket(socket, 'GET', '/tokens'), 200).tokens;
    },
    async revoke(id) {
      const r = await askControlSocket(socket, 'DELETE', `/tokens/${encodeURIComponent(id)}`);
      if (r.status === 404) return false;
      check(r, 200);
      return true;
    },
    close: async () => {},
  };
}

function serverName(url: string): string {
  try {
    const u = new URL(url);
    return `${u.hostname}:${u.port || 5432}${u.pathname}`;
  } catch {
    return '(unreadable DATABASE_URL)';
  }
}

try {
  await main();
} catch (err) {
  const message = err instanceof CommandError || err instanceof ConfigError ? err.message : `token command failed: ${(err as Error).message}`;
  console.error(message);
  process.exit(1);
}
