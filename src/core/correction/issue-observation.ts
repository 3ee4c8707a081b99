// Which observation a run is updated on. Only values at or before the issue time are ever looked
// at, so nothing observed later can change a run's answer.

export interface IssueObservation {
  /** Epoch ms of the observation. */
  timeMs: number;
  value: number;
  /** 'run': carried in the run's body (it wins); 'archive': the gauge's stored observations. */
  source: 'run' | 'archive';
  /** Steps between the observation and the issue time (0 = at issue time). */
  ageSteps: number;
}

/**
 * The run's own issue-time observation when given, else the latest finite stored one at or
 * before issue time within maxAgeSteps. `stored` may hold any times: later ones are ignored.
 * Returns the observation, or why there is none.
 */
export function chooseIssueObservation(
  issueMs: number,
  stepSeconds: number,
  maxAgeSteps: number,
  fromRun: number | null | undefined,
  stored: readonly { t: number; value: number | null }[],
): { observation: IssueObservation; reason: null } | { observation: null; reason: string } {
  if (fromRun !== null && fromRun !== undefined && Number.isFinite(fromRun)) {
    return { observation: { timeMs: issueMs, value: fromRun, source: 'run', ageSteps: 0 }, reason: null };
  }
  const stepMs = stepSeconds * 1000;
  let best: { t: number; value: number } | null = null;
  let latestAny: number | null = null;
  for (const o of stored) {
    if (o.t > issueMs || o.value === null || !Number.isFinite(o.value)) continue;
    if (latestAny === null || o.t > latestAny) latestAny = o.t;
    if (o.t >= issueMs - maxAgeSteps * stepMs && (!best || o.t > best.t)) best = { t: o.t, value: o.value };
  }
  if (best) return { observation: { timeMs: best.t, value: best.value, source: 'archive', ageSteps: Math.round((issueMs - best.t) / stepMs) }, reason: null };
  const limit = `${maxAgeSteps} step${maxAgeSteps === 1 ? '' : 's'}`;
  return {
    observation: null,
    reason: latestAny === null
      ? `no observation at or before the issue time within the gauge's maximum age (${limit}); the run was corrected without updating`
      : `the latest observation (${new Date(latestAny).toISOString().replace('.000Z', 'Z')}) is older than the gauge's maximum age (${limit}); the run was corrected without updating`,
  };
}
