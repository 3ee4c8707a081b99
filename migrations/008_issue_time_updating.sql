-- Issue-time updating: the updater stored with a model version, its per-lead error archive, the
-- gauge's limit on the observation's age, and the observation each run used.

-- The updater (closed form: multiplier of the issue-time error per lead time); null = no updating.
alter table model_versions add column updating jsonb;

-- 'updating': per-lead errors of the members after the residual model and the updater.
alter table error_archives drop constraint if exists error_archives_lead_mode_check;
alter table error_archives add constraint error_archives_lead_mode_check check (lead_mode in ('lead-free', 'per-lead', 'updating'));

-- Per case of an 'updating' archive (in the archive's case order), the issue-time error
-- T(observed) − T(corrected) at the case's issue time: float64 little-endian; null for other archives.
alter table error_archives add column issue_error bytea;

-- A run uses the latest observation at most this many steps older than its issue time.
alter table gauges add column updating_max_age_steps integer not null default 2 check (updating_max_age_steps between 0 and 1000);

-- The observation a run was updated on (from the run's body or the gauge's archive), or null.
alter table forecast_runs add column issue_observation_time timestamptz;
alter table forecast_runs add column issue_observation_value double precision;
alter table forecast_runs add column issue_observation_source text check (issue_observation_source in ('run', 'archive'));
