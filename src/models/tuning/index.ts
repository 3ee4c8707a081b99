// Hyperparameter tuning by Bayesian optimisation (GP surrogate, expected improvement).
export { tune } from './tune.ts';
export type { Trial, TuneOptions, TuneProgress, TuneResult } from './tune.ts';
export type { ParamKind, Params, SearchParam } from './space.ts';
export { proposeNext } from './propose-next.ts';
export type { Proposal, ProposeOptions } from './propose-next.ts';
export { conditionGp, predictGp } from './gp.ts';
export type { GpHyper, GpModel } from './gp.ts';
export { fitGp, DEFAULT_BOUNDS } from './fit-gp.ts';
export type { FitGpOptions, GpBounds } from './fit-gp.ts';
export { expectedImprovement } from './expected-improvement.ts';
