// The worker entry when the server runs from TypeScript source (vitest, tsx, vite dev): Node 20
// does not pass a loader given by `--import` on to worker threads, so tsx's is registered here,
// in the worker, before the entry is loaded. The built app loads build/work-worker.js instead.
import { register } from 'tsx/esm/api';

register();
const entry = await import('./work-worker.ts');
export default entry.default;
