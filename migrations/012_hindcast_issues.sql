-- Each hindcast's output per issue time (what a served run would have said then), so the whole
-- hindcast can be read back and downloaded, not only its summary scores.
create table hindcast_issues (
  job_id bigint not null references jobs (id) on delete cascade,
  issue_time timestamptz not null,
  -- Per lead time: observed flow, raw ensemble mean, corrected ensemble mean, the stochastic
  -- stage's quantiles at the job result's perIssue.probabilities, P(flow > threshold) per threshold;
  -- then per threshold P(exceeded at any lead time). float64 little-endian; NaN = missing.
  output bytea not null,
  primary key (job_id, issue_time)
);
