-- An Idempotency-Key names one request to one gauge: the same key sent to another gauge is another
-- request (before this, it replayed the first gauge's forecast and the second run was never stored).
-- The unique key includes the gauge id, which is also the distribution column a sharded PostgreSQL
-- would need.
alter table forecast_runs drop constraint if exists forecast_runs_idempotency_key_key;
create unique index forecast_runs_gauge_idempotency_key on forecast_runs (gauge_id, idempotency_key);
