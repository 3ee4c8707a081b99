-- Plausible values per gauge: caps set by an admin (null = derived or default, see
-- src/services/plausible-values.ts) and the largest flow the archive holds, kept up to date by
-- ingest so the derived flow cap costs no scan of the archive.
alter table gauges add column max_flow double precision check (max_flow > 0);
alter table gauges add column max_precipitation double precision check (max_precipitation > 0);
alter table gauges add column min_air_temperature double precision;
alter table gauges add column max_air_temperature double precision;
alter table gauges add constraint gauges_air_temperature_range check (
  (min_air_temperature is null and max_air_temperature is null) or min_air_temperature < max_air_temperature);
alter table gauges add column archive_max_flow double precision;
update gauges g set archive_max_flow = greatest(
  (select max(value) from observed_flow o where o.gauge_id = g.id and value < 'Infinity'::float8),
  (select max(value) from member_simulations s where s.gauge_id = g.id and value < 'Infinity'::float8));
