// Uniform, normal and gamma variates for the scenario, drawn from the project PRNG
// (src/core/prng.ts, xoshiro128**). Each sub-task (weather, observation noise, members, each
// forecast issue) gets its own stream, so changing one never shifts the others.
import { createPrng } from '../core/prng.ts';

export interface Variates {
  /** Uniform in (0, 1] — never 0, so log(u) is finite. */
  uniform(): number;
  /** Standard normal N(0, 1). */
  normal(): number;
  /** Gamma with the given shape (> 0) and scale (> 0); mean = shape × scale. */
  gamma(shape: number, scale: number): number;
}

// One splitmix32 round (a well-mixed 32-bit hash), used to fold extra integers into a seed.
function splitmix32(x: number): number {
  let z = (x + 0x9e3779b9) | 0;
  z = Math.imul(z ^ (z >>> 16), 0x85ebca6b);
  z = Math.imul(z ^ (z >>> 13), 0xc2b2ae35);
  return (z ^ (z >>> 16)) >>> 0;
}

/** Folds integers into one seed in [0, 2^32): for streams keyed by more than the core PRNG's 2048 stream numbers (e.g. per issue time). */
export function mixSeed(...parts: number[]): number {
  let h = 0x243f6a88;
  for (const p of parts) h = splitmix32((h ^ splitmix32(p | 0)) | 0);
  return h;
}

export function createVariates(seed: number, stream: number): Variates {
  const prng = createPrng(seed, stream);
  const uniform = (): number => 1 - prng.nextFloat();
  const normal = (): number => prng.normal();

  // Marsaglia & Tsang (2000, ACM TOMS 26(3)) squeeze method for shape >= 1;
  // shape < 1 through the boost gamma(a) = gamma(a + 1) · U^(1/a) given in the same paper.
  const gammaUnitScale = (shape: number): number => {
    if (shape < 1) return gammaUnitScale(shape + 1) * Math.pow(uniform(), 1 / shape);
    const d = shape - 1 / 3;
    const c = 1 / Math.sqrt(9 * d);
    for (;;) {
      let x = 0;
      let v = 0;
      do {
        x = normal();
        v = 1 + c * x;
      } while (v <= 0);
      v = v * v * v;
      const u = uniform();
      if (u < 1 - 0.0331 * x * x * x * x) return d * v;
      if (Math.log(u) < 0.5 * x * x + d * (1 - v + Math.log(v))) return d * v;
    }
  };

  return { uniform, normal, gamma: (shape, scale) => gammaUnitScale(shape) * scale };
}
