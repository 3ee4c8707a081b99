// How the tree grower and its helper thread talk: no messages, only shared memory. The grower
// writes an operation into `control` and bumps COMMAND; the helper runs its half of the features
// and stores the same number in DONE. Atomics.wait / notify put whichever side is early to sleep.
import type { HistData } from './hist-kernels.ts';

export const COMMAND = 0;
export const DONE = 1;
export const OP = 2;
export const HIST = 3;
export const SMALL = 4;
export const BEGIN = 5;
export const END = 6;
export const J0 = 7;
export const J1 = 8;
export const UNIT = 9;
export const READY = 10;
export const CONTROL_SIZE = 16;

export const OP_EXIT = 0;
/** Histogram HIST of positions [BEGIN, END) for features J0 … J1−1. */
export const OP_BUILD = 1;
/** Histogram SMALL of positions [BEGIN, END), then HIST −= SMALL, for features J0 … J1−1. */
export const OP_BUILD_SUBTRACT = 2;
/** Best split of HIST over features J0 … J1−1 (numbers G, H, λ, min child weight, start) into `split`. */
export const OP_SPLIT = 3;

/** Numbers passed with OP_SPLIT, in `numbers`. */
export const NUM_G = 0;
export const NUM_H = 1;
export const NUM_LAMBDA = 2;
export const NUM_MCW = 3;
export const NUM_START = 4;

export interface HelperStart extends HistData {
  /** nHists × nFeatures × SLOTS histograms, shared. */
  arena: Float64Array;
  histSize: number;
  /** The tree's features, shared (the grower writes them at the start of each tree). */
  feats: Int32Array;
  control: Int32Array;
  numbers: Float64Array;
  split: Float64Array;
}
