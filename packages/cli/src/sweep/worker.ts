/**
 * Sweep worker thread: receives the scenario once, then batches of point indices, and posts
 * back the rows.
 * @module
 */
import { parentPort, workerData } from 'node:worker_threads';
import type { SweepSpec } from '../scenario/schema.ts';
import { evaluatePoint } from './evaluate.ts';

interface Init {
  readonly base: unknown;
  readonly sweep: SweepSpec;
}

const init = workerData as Init;
const port = parentPort!;
port.on('message', (msg: { indices: number[] } | 'exit') => {
  if (msg === 'exit') {
    port.close();
    return;
  }
  const rows = msg.indices.map((i) => evaluatePoint(init.base, init.sweep, i));
  port.postMessage({ rows });
});
port.postMessage({ ready: true });
