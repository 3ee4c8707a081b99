/** Append-only Float64Array that doubles its capacity: one number per case without a boxed array. */
export class GrowableF64 {
  private data: Float64Array;
  private n = 0;

  constructor(capacity = 256) {
    this.data = new Float64Array(Math.max(1, capacity));
  }

  push(v: number): void {
    if (this.n === this.data.length) {
      const next = new Float64Array(this.data.length * 2);
      next.set(this.data);
      this.data = next;
    }
    this.data[this.n++] = v;
  }

  get length(): number {
    return this.n;
  }

  /** The values pushed so far (a view, valid until the next push). */
  view(): Float64Array {
    return this.data.subarray(0, this.n);
  }
}
