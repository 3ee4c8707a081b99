export * from './prng.ts';
