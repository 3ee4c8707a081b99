import { ConfigError, loadConfig } from './config.ts';
import { DataDirLockedError } from './store/embedded-driver.ts';
import { startService } from './server.ts';

try {
  const config = loadConfig();
  const service = await startService(config);
  const shutdown = (signal: string) => {
    service.app.log.info({ signal }, 'shutting down: finishing requests in flight');
    service
      .stop()
      .then(() => process.exit(0))
      .catch((err) => {
        console.error(err);
        process.exit(1);
      });
  };
  process.once('SIGINT', () => shutdown('SIGINT'));
  process.once('SIGTERM', () => shutdown('SIGTERM'));
} catch (err) {
  if (err instanceof ConfigError || err instanceof DataDirLockedError) {
    console.error(err.message);
    process.exit(1);
  }
  throw err;
}
