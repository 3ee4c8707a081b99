-- Forecast forcings of past runs (what each run was driven by at its lead times), so error
-- archives from past runs never use forcings observed after the issue time.
create table reforecast_forcings (
  gauge_id text not null,
  issue_time timestamptz not null,
  variable text not null,
  lead integer not null check (lead >= 1),
  value double precision,
  primary key (gauge_id, issue_time, variable, lead),
  foreign key (gauge_id, variable) references forcing_variables(gauge_id, name) on delete cascade
);
