// Loads the TypeScript worker through tsx inside the worker thread (no build step).
import { register } from 'tsx/esm/api';

register();
await import('./worker.ts');
