// Package store keeps riffle's durable state in a bbolt file: impression
// provenance records, feedback events, outcomes and aggregates.
//
// A *Store is safe for concurrent use. The data plane hands impressions to
// Record, which never blocks: a bounded queue feeds one writer goroutine
// that commits them in batches (by count or after Interval), so one fsync
// covers a whole batch and an impression still queued when the process
// dies is lost. AddEvents joins that writer: it takes everything queued,
// then commits the events in the same transaction and returns only after
// the fsync, so an acknowledged event is on disk and always finds its
// impression. Finalize, run by a background pass, turns closed attribution
// windows into outcomes and updates the aggregates in the same
// transaction, so a restart neither loses nor double-counts an outcome.
//
// The layout, one bbolt file per sidecar:
//
//	riffle   schema version
//	imp      impression id -> compact record (168 bytes: 10 slots of 9-byte items)
//	open     served time + id -> nothing, for impressions not yet final
//	events   impression id + sequence -> event record
//	keys     idempotency key -> the event's key in events
//	exp      experiment -> totals, per-user counts, per-minute counts
//
// Metrics (on Options.Registerer): riffle_store_impressions_queued_total,
// _committed_total, _dropped_total, riffle_store_queue_length,
// riffle_store_commit_duration_seconds, and
// riffle_impression_outcomes_total{experiment,outcome}, which starts at the
// totals stored in the file, so that it survives restarts and its sum over
// every sidecar's series is the fleet's count of each outcome.
package store
