/** How a job's work reports its stage and percent done; the answer says whether it was asked to stop. */
export type JobProgress = (stage: string, percent: number) => Promise<boolean>;
