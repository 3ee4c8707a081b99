import { loadConfig } from '../config.ts';
import { migrate } from './migrate.ts';
import { openDb } from './open.ts';

const config = loadConfig();
const db = await openDb({ databaseUrl: config.DATABASE_URL, dataDir: config.DATA_DIR });
try {
  const applied = await migrate(db);
  console.log(applied.length ? `applied: ${applied.join(', ')}` : 'database is up to date');
} finally {
  await db.close();
}
