// The tree grower's helper thread starts here: plain JavaScript that loads hist-helper.ts through
// tsx, because loader flags given to the main process do not reach worker threads on Node.js 20.
import { tsImport } from 'tsx/esm/api';

await tsImport('./hist-helper.ts', import.meta.url);
