// Entry of a sweep worker thread: a worker starts without the main thread's TypeScript loader, so it
// registers tsx itself before loading the worker module.
import { register } from 'tsx/esm/api';
register();
await import('./sweep-worker.ts');
