-- riffle's shared store, schema version 1. Times are Unix nanoseconds in
-- bigint; hashed users, seeds and ids keep their 64-bit patterns in
-- bigint and bytea. Every table is keyed so that it can be distributed by
-- impression id (impressions, events) or by experiment (the sums).

-- One row per experiment: what was served and the outcome totals.
CREATE TABLE riffle_experiments (
	name            text PRIMARY KEY,
	policy          text NOT NULL DEFAULT '',
	policy_ns       bigint NOT NULL DEFAULT 0,   -- time of the impression policy came from
	first_ns        bigint NOT NULL,
	last_ns         bigint NOT NULL,
	impressions     bigint NOT NULL DEFAULT 0,
	interleaved     bigint NOT NULL DEFAULT 0,
	out_none        bigint NOT NULL DEFAULT 0,
	out_incumbent   bigint NOT NULL DEFAULT 0,
	out_challenger  bigint NOT NULL DEFAULT 0,
	out_tie         bigint NOT NULL DEFAULT 0
);

-- One row per served impression. state: 0 open, 1 final, 2 set aside
-- (cannot be finalised: see why). slots is store.AppendSlots' compact
-- per-slot record (item, team as a small integer, ranks, probabilities).
CREATE TABLE riffle_impressions (
	id          bytea PRIMARY KEY,
	served_ns   bigint NOT NULL,
	experiment  text NOT NULL,
	instance    text NOT NULL,                   -- the sidecar that served it
	user_hash   bigint NOT NULL,                 -- 0: no user key
	policy      text NOT NULL,
	seed        bigint NOT NULL,
	fallback    text NOT NULL,
	slots       bytea NOT NULL,
	state       smallint NOT NULL DEFAULT 0,
	outcome     smallint,
	score_incumbent   double precision,
	score_challenger  double precision,
	why         text
);
-- The finaliser's queue: open impressions by time.
CREATE INDEX riffle_impressions_open ON riffle_impressions (served_ns) WHERE state = 0;
-- Export and retention walk impressions by time.
CREATE INDEX riffle_impressions_served ON riffle_impressions (served_ns);

-- One row per accepted feedback event. A key is unique wherever it was
-- sent; without a key, one event per impression, item and type.
CREATE TABLE riffle_events (
	impression  bytea NOT NULL,
	seq         bigint GENERATED ALWAYS AS IDENTITY,
	item        text NOT NULL,
	type        text NOT NULL,
	at_ns       bigint NOT NULL,
	key         text,
	PRIMARY KEY (impression, seq)
);
CREATE UNIQUE INDEX riffle_events_key ON riffle_events (key) WHERE key IS NOT NULL;
CREATE UNIQUE INDEX riffle_events_unkeyed ON riffle_events (impression, item, type) WHERE key IS NULL;

-- Outcome counts per experiment and hashed user, for the variance
-- clustered by user: exact for the whole fleet.
CREATE TABLE riffle_users (
	experiment      text NOT NULL,
	user_hash       bigint NOT NULL,
	out_none        bigint NOT NULL DEFAULT 0,
	out_incumbent   bigint NOT NULL DEFAULT 0,
	out_challenger  bigint NOT NULL DEFAULT 0,
	out_tie         bigint NOT NULL DEFAULT 0,
	PRIMARY KEY (experiment, user_hash)
);

-- Per-minute counts behind the ETA's recent rate: interleaved impressions
-- served in the minute, and those of them finalised with feedback.
CREATE TABLE riffle_minutes (
	experiment     text NOT NULL,
	minute         bigint NOT NULL,              -- Unix minute
	interleaved    bigint NOT NULL DEFAULT 0,
	with_feedback  bigint NOT NULL DEFAULT 0,
	PRIMARY KEY (experiment, minute)
);

-- The database's identity, so that riffle report refuses to count one
-- database twice.
CREATE TABLE riffle_meta (
	key    text PRIMARY KEY,
	value  text NOT NULL
);
INSERT INTO riffle_meta (key, value) VALUES ('database', gen_random_uuid()::text);
