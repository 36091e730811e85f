// Package proxy is riffle's data plane: for each configured route it sends
// the request to the incumbent and the challenger concurrently, locates the
// ranked list in each response by RFC 6901 pointers, interleaves the two
// lists under the experiment's policy and serves the incumbent's document
// with its list replaced, stamped with a Riffle-Impression header. It hedges
// against a failing or slow challenger by serving the incumbent alone, keeps
// users outside the ramp on the incumbent, passes every other path through
// to the incumbent untouched, and hands each impression's provenance to a
// Sink.
//
// A Server is safe for concurrent use: its configuration lives in an
// immutable runtime swapped atomically by Apply, so a request finishes on
// the runtime it started with.
package proxy
