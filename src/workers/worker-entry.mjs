// Worker threads start here: plain JavaScript that loads the TypeScript worker module through tsx,
// because loader flags given to the main process do not reach worker threads on Node.js 20.
import { workerData } from 'node:worker_threads';
import { tsImport } from 'tsx/esm/api';

await tsImport(workerData.module, import.meta.url);
