// Parameter sets of the raw ensemble: a tight cloud around a deliberately shifted point, so the
// ensemble is biased and too narrow — as raw ensembles that carry only parameter uncertainty
// usually are. Values are clipped into the accepted ranges (with a small margin).
import { CEMANEIGE_RANGES } from './cemaneige.ts';
import type { CatchmentParameters } from './catchment-model.ts';
import { GR4J_RANGES } from './gr4j-parameters.ts';
import type { Variates } from './random-variates.ts';

export interface ParameterCloud {
  readonly center: CatchmentParameters;
  /** Log-space standard deviations for the positive scale parameters. */
  readonly logSd: { readonly x1: number; readonly x3: number; readonly x4: number; readonly kf: number };
  /** Additive standard deviations. */
  readonly sd: { readonly x2: number; readonly ctg: number };
}

const RANGES = { ...GR4J_RANGES, ...CEMANEIGE_RANGES };
const MARGIN = 1e-6;

function clip(key: keyof typeof RANGES, v: number): number {
  const r = RANGES[key];
  const pad = (r.max - r.min) * MARGIN;
  return Math.min(r.max - pad, Math.max(r.min + pad, v));
}

/** Member id for set k (0-based): p01, p02, … (three digits from 100 members on). */
export function memberId(k: number, count: number): string {
  return `p${String(k + 1).padStart(count >= 100 ? 3 : 2, '0')}`;
}

export function drawParameterCloud(variates: Variates, cloud: ParameterCloud, count: number): CatchmentParameters[] {
  const { center, logSd, sd } = cloud;
  const out: CatchmentParameters[] = [];
  for (let k = 0; k < count; k++) {
    out.push({
      x1: clip('x1', center.x1 * Math.exp(logSd.x1 * variates.normal())),
      x2: clip('x2', center.x2 + sd.x2 * variates.normal()),
      x3: clip('x3', center.x3 * Math.exp(logSd.x3 * variates.normal())),
      x4: clip('x4', center.x4 * Math.exp(logSd.x4 * variates.normal())),
      ctg: clip('ctg', center.ctg + sd.ctg * variates.normal()),
      kf: clip('kf', center.kf * Math.exp(logSd.kf * variates.normal())),
    });
  }
  return out;
}
