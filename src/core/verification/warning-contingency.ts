/**
 * The 2 × 2 table of a yes/no warning (the attention flag: forecast probability ≥ level) against
 * the observed event, and the usual scores of it (Jolliffe & Stephenson 2012, ch. 3):
 * hit rate (probability of detection) a/(a + c), false-alarm ratio b/(a + b), critical success
 * index a/(a + b + c), false-alarm rate b/(b + d), Peirce skill score = hit rate − false-alarm
 * rate, frequency bias (a + b)/(a + c). a hits, b false alarms, c misses, d correct rejections.
 */
export interface WarningContingency {
  level: number;
  n: number;
  hits: number;
  falseAlarms: number;
  misses: number;
  correctRejections: number;
  hitRate: number;
  falseAlarmRatio: number;
  criticalSuccessIndex: number;
  falseAlarmRate: number;
  peirceSkill: number;
  frequencyBias: number;
}

export function contingencyScores(level: number, a: number, b: number, c: number, d: number): WarningContingency {
  const r = (x: number, y: number) => (y > 0 ? x / y : NaN);
  const hitRate = r(a, a + c);
  const falseAlarmRate = r(b, b + d);
  return {
    level,
    n: a + b + c + d,
    hits: a,
    falseAlarms: b,
    misses: c,
    correctRejections: d,
    hitRate,
    falseAlarmRatio: r(b, a + b),
    criticalSuccessIndex: r(a, a + b + c),
    falseAlarmRate,
    peirceSkill: hitRate - falseAlarmRate,
    frequencyBias: r(a + b, a + c),
  };
}

/** Warn when prob ≥ level; NaN probabilities or outcomes are no case. */
export function warningContingency(prob: ArrayLike<number>, outcome: ArrayLike<number>, level: number): WarningContingency {
  if (!(level >= 0 && level <= 1)) throw new RangeError('level must be in [0, 1]');
  let a = 0;
  let b = 0;
  let c = 0;
  let d = 0;
  for (let i = 0; i < prob.length; i++) {
    const p = prob[i];
    const o = outcome[i];
    if (Number.isNaN(p) || Number.isNaN(o)) continue;
    const warned = p >= level;
    if (o > 0) warned ? a++ : c++;
    else warned ? b++ : d++;
  }
  return contingencyScores(level, a, b, c, d);
}
