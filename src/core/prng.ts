/**
 * Seeded pseudo-random numbers: xoshiro128** (Blackman & Vigna 2018), state filled by
 * splitmix64 as the generator's authors recommend. Only 32-bit integer operations per draw,
 * four numbers of state, no allocation per draw.
 *
 * Seeding: splitmix64 is started at the integer seed (0 ≤ seed < 2^53, so 32- and 53-bit
 * seeds are both exact); its first output gives s0 (low word) and s1 (high word), its second
 * s2 and s3. `stream` > 0 offsets the splitmix64 start by stream·2^53, giving independent
 * generators for the same seed (used to keep separate sub-tasks from shifting each other).
 */

const MASK64 = (1n << 64n) - 1n;

function splitmix64(state: bigint): [next: bigint, out: bigint] {
  const s = (state + 0x9e3779b97f4a7c15n) & MASK64;
  let z = s;
  z = ((z ^ (z >> 30n)) * 0xbf58476d1ce4e5b9n) & MASK64;
  z = ((z ^ (z >> 27n)) * 0x94d049bb133111ebn) & MASK64;
  return [s, z ^ (z >> 31n)];
}

export class Prng {
  private s0: number;
  private s1: number;
  private s2: number;
  private s3: number;
  // Second value of the last polar-method pair, kept so normal() costs one pair per two calls.
  private spareNormal = 0;
  private hasSpare = false;

  constructor(s0: number, s1: number, s2: number, s3: number) {
    this.s0 = s0 | 0;
    this.s1 = s1 | 0;
    this.s2 = s2 | 0;
    this.s3 = s3 | 0;
    if ((this.s0 | this.s1 | this.s2 | this.s3) === 0) {
      throw new RangeError('xoshiro128** state must not be all zero');
    }
  }

  /** Next 32-bit unsigned integer (0 … 2^32 − 1). */
  nextUint32(): number {
    const s1 = this.s1;
    const r = Math.imul(rotl(Math.imul(s1, 5), 7), 9);
    const t = s1 << 9;
    this.s2 ^= this.s0;
    this.s3 ^= s1;
    this.s1 = s1 ^ this.s2;
    this.s0 ^= this.s3;
    this.s2 ^= t;
    this.s3 = rotl(this.s3, 11);
    return r >>> 0;
  }

  /** Uniform double in [0, 1) with 53 random bits (two 32-bit draws). */
  nextFloat(): number {
    const hi = this.nextUint32() >>> 5; // 27 bits
    const lo = this.nextUint32() >>> 6; // 26 bits
    return (hi * 67108864 + lo) * 1.1102230246251565e-16; // / 2^53
  }

  /** Uniform double in [0, 1) with 32-bit resolution (one draw): for choices among few items. */
  nextUniform32(): number {
    return this.nextUint32() * 2.3283064365386963e-10; // / 2^32
  }

  /** Uniform integer in [0, n) for 1 ≤ n ≤ 2^32 (float scaling; bias below 2^-21 for n ≤ 2^32). */
  nextInt(n: number): number {
    return Math.floor(this.nextFloat() * n);
  }

  /** Standard normal deviate (Marsaglia polar method), times sd plus mean. */
  normal(mean = 0, sd = 1): number {
    if (this.hasSpare) {
      this.hasSpare = false;
      return mean + sd * this.spareNormal;
    }
    let u = 0;
    let v = 0;
    let q = 0;
    do {
      u = 2 * this.nextFloat() - 1;
      v = 2 * this.nextFloat() - 1;
      q = u * u + v * v;
    } while (q >= 1 || q === 0);
    const f = Math.sqrt((-2 * Math.log(q)) / q);
    this.spareNormal = v * f;
    this.hasSpare = true;
    return mean + sd * u * f;
  }

  /** The four state words as unsigned integers (to store or resume a generator). */
  state(): [number, number, number, number] {
    return [this.s0 >>> 0, this.s1 >>> 0, this.s2 >>> 0, this.s3 >>> 0];
  }
}

function rotl(x: number, k: number): number {
  return (x << k) | (x >>> (32 - k));
}

/** Generator from an integer seed 0 ≤ seed ≤ 2^53 − 1; `stream` picks an independent sequence. */
export function createPrng(seed: number, stream = 0): Prng {
  if (!Number.isSafeInteger(seed) || seed < 0) {
    throw new RangeError(`seed must be an integer in [0, 2^53 - 1], got ${seed}`);
  }
  if (!Number.isSafeInteger(stream) || stream < 0 || stream > 2047) {
    throw new RangeError(`stream must be an integer in [0, 2047], got ${stream}`);
  }
  const start = (BigInt(seed) + (BigInt(stream) << 53n)) & MASK64;
  const [st1, a] = splitmix64(start);
  const [, b] = splitmix64(st1);
  return new Prng(
    Number(a & 0xffffffffn),
    Number(a >> 32n),
    Number(b & 0xffffffffn),
    Number(b >> 32n),
  );
}

/** splitmix64 outputs from a 64-bit start, exposed for checking the seeding step. */
export function splitmix64Sequence(start: bigint, count: number): bigint[] {
  const out: bigint[] = [];
  let s = start & MASK64;
  for (let i = 0; i < count; i++) {
    const [n, z] = splitmix64(s);
    s = n;
    out.push(z);
  }
  return out;
}
