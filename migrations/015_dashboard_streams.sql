-- Dashboards: numbered run events for server-sent events, and short-lived stream tickets.

-- Each run's place in the order runs were committed (inserts take an advisory lock, so numbers
-- are handed out in commit order): the `id:` of its server-sent event. A client resuming with
-- Last-Event-ID is sent every run numbered after it, from the store, so resuming works after a
-- restart and on any instance. Existing runs are numbered in no particular order.
alter table forecast_runs add column event_seq bigserial;
create unique index forecast_runs_event_seq on forecast_runs (event_seq);

-- A stream ticket opens one event stream, once, within about a minute of being issued: browsers
-- cannot send an Authorization header with EventSource, and a long-lived token must not sit in a
-- URL. Only the ticket's hash is kept; a used or expired ticket is deleted.
create table stream_tickets (
  ticket_hash text primary key,
  token_id text not null references api_tokens(id) on delete cascade,
  expires_at timestamptz not null
);
create index stream_tickets_expiry on stream_tickets (expires_at);
