import { parseArgs } from 'node:util';
import { loadConfig } from '../config.ts';
import { migrate } from '../store/migrate.ts';
import { openDb } from '../store/open.ts';
import { listTokens, revokeToken, type Role } from '../store/tokens-repo.ts';
import { createToken } from './tokens.ts';

const usage = `usage:
  npm run token -- create --role admin|ingest|read [--name NAME]
  npm run token -- list
  npm run token -- revoke ID`;

const { positionals, values } = parseArgs({
  allowPositionals: true,
  options: { role: { type: 'string' }, name: { type: 'string' } },
});
const [command, arg] = positionals;
if (!command || !['create', 'list', 'revoke'].includes(command)) {
  console.error(usage);
  process.exit(2);
}
if (command === 'create' && !['admin', 'ingest', 'read'].includes(values.role ?? '')) {
  console.error(`--role must be admin, ingest or read\n${usage}`);
  process.exit(2);
}

const config = loadConfig();
const db = await openDb({ databaseUrl: config.DATABASE_URL, dataDir: config.DATA_DIR });
try {
  await migrate(db);
  if (command === 'create') {
    const { id, token } = await createToken(db, values.role as Role, values.name ?? `${values.role} token`);
    console.log(`token ${id} (${values.role}) created; it is shown only this once:\n${token}`);
  } else if (command === 'list') {
    for (const t of await listTokens(db)) {
      console.log(`${t.id}  ${t.role.padEnd(6)}  ${t.revoked_at ? 'revoked' : 'active '}  ${t.name}`);
    }
  } else {
    console.log((await revokeToken(db, arg ?? '')) ? `revoked ${arg}` : `no active token ${arg}`);
  }
} finally {
  await db.close();
}
