// The tree grower's helper thread: builds, subtracts and scans histograms for its share of the
// tree's features when asked through shared memory (hist-protocol.ts), until told to exit.
import { workerData } from 'node:worker_threads';
import { buildHistRange, findSplitRange, subtractHistRange } from './hist-kernels.ts';
import * as P from './hist-protocol.ts';

const d = workerData as P.HelperStart;
const { control: c, arena, histSize, feats, numbers, split } = d;
const histAt = (i: number) => arena.subarray(i * histSize, (i + 1) * histSize);

Atomics.store(c, P.READY, 1);
Atomics.notify(c, P.READY);
let seen = 0;
for (;;) {
  // A short spin before sleeping: the next command usually follows within microseconds.
  for (let spin = 0; spin < 2000 && Atomics.load(c, P.COMMAND) === seen; spin++);
  while (Atomics.load(c, P.COMMAND) === seen) Atomics.wait(c, P.COMMAND, seen);
  seen = Atomics.load(c, P.COMMAND);
  const op = c[P.OP];
  if (op === P.OP_EXIT) break;
  const j0 = c[P.J0];
  const j1 = c[P.J1];
  if (op === P.OP_BUILD) {
    buildHistRange(d, c[P.UNIT] === 1, histAt(c[P.HIST]), feats, j0, j1, c[P.BEGIN], c[P.END]);
  } else if (op === P.OP_BUILD_SUBTRACT) {
    const small = histAt(c[P.SMALL]);
    buildHistRange(d, c[P.UNIT] === 1, small, feats, j0, j1, c[P.BEGIN], c[P.END]);
    subtractHistRange(d.nBins, histAt(c[P.HIST]), small, feats, j0, j1);
  } else if (op === P.OP_SPLIT) {
    findSplitRange(d.nBins, histAt(c[P.HIST]), feats, j0, j1, numbers[P.NUM_G], numbers[P.NUM_H], numbers[P.NUM_LAMBDA], numbers[P.NUM_MCW], numbers[P.NUM_START], split);
  }
  Atomics.store(c, P.DONE, seen);
  Atomics.notify(c, P.DONE);
}
Atomics.store(c, P.DONE, seen);
Atomics.notify(c, P.DONE);
