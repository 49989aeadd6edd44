// Package otelx instruments routing decisions with OpenTelemetry traces and
// metrics, and reads and writes OTLP JSON Lines trace files.
//
// Concurrency: instrumentation values are safe for concurrent use.
package otelx
