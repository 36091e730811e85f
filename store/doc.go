// Package store keeps riffle's durable state in a bbolt file: impression
// provenance records, feedback events, outcomes and aggregates.
package store
