import { rocCurve, type RocCurve } from './roc.ts';

/**
 * Relative economic value (Richardson 2000) of warnings for a user who can protect at cost C
 * against a loss L, cost/loss ratio α = C/L, with event base rate s. Expenses per case in units of
 * L: climatology min(α, s) (always or never protect), a perfect forecast s·α, a warning with hit
 * rate H and false-alarm rate F: α(H·s + F(1 − s)) + (1 − H)·s. Value
 *   V = (E_climate − E_forecast)/(E_climate − E_perfect),
 * 1 for a perfect forecast, 0 for climatology, negative when worse. A probability forecast gives
 * one (H, F) per decision level; the user picks the best, so its curve is the upper envelope.
 * At α = s the value of one decision level is H − F (the Peirce skill score), and that is the
 * highest value that decision level reaches over α (Richardson 2000, section 3).
 */
export function relativeValue(hitRate: number, falseAlarmRate: number, baseRate: number, costLoss: number): number {
  const s = baseRate;
  const a = costLoss;
  const climate = Math.min(a, s);
  const perfect = s * a;
  const forecast = a * (hitRate * s + falseAlarmRate * (1 - s)) + (1 - hitRate) * s;
  const denom = climate - perfect;
  return denom > 0 ? (climate - forecast) / denom : NaN;
}

export interface ValuePoint {
  costLoss: number;
  /** Best value over the decision levels (the envelope). */
  value: number;
  /** Decision level (warn when probability ≥ level) that reaches it. */
  level: number | null;
}

/** Default cost/loss ratios: 0.01 … 0.99, denser at small ratios, where flood users sit. */
export const COST_LOSS_RATIOS: readonly number[] = [0.01, 0.02, 0.03, 0.05, 0.07, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.99];

export function valueCurve(prob: ArrayLike<number>, outcome: ArrayLike<number>, costLoss: readonly number[] = COST_LOSS_RATIOS): { baseRate: number; points: ValuePoint[] } {
  return valueCurveFromRoc(rocCurve(prob, outcome), costLoss);
}

/** The same from a ROC curve already computed. */
export function valueCurveFromRoc(roc: RocCurve, costLoss: readonly number[] = COST_LOSS_RATIOS): { baseRate: number; points: ValuePoint[] } {
  const s = roc.n ? roc.events / roc.n : NaN;
  // The end points (0, 0) and (1, 1) are "never" and "always" protect: climatology's own choices.
  const levels = roc.points.slice(1);
  return {
    baseRate: s,
    points: costLoss.map((a) => {
      let best = -Infinity;
      let level: number | null = null;
      for (const p of levels) {
        const v = relativeValue(p.hitRate, p.falseAlarmRate, s, a);
        if (v > best) {
          best = v;
          level = p.level;
        }
      }
      return { costLoss: a, value: Number.isFinite(best) ? best : NaN, level: Number.isFinite(best) ? level : null };
    }),
  };
}
