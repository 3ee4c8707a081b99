export * from './prng.ts';
export * from './quantile.ts';
export * from './exceedance.ts';
export * from './normal.ts';
