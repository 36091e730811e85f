// Package jsonptr parses RFC 6901 JSON Pointers and evaluates them over raw
// JSON bytes without decoding the document: evaluation walks the bytes once,
// validating them as RFC 8259 JSON, and returns the byte span of the
// referenced value, so a caller can splice a new value into the original
// document.
//
// A Pointer is immutable once parsed and safe for concurrent use.
package jsonptr
