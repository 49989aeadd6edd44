// Package collectortest runs an OpenTelemetry Collector pipeline in the
// test process, built from the Collector's own Go modules: the OTLP
// receiver (go.opentelemetry.io/collector/receiver/otlpreceiver, OTLP/HTTP
// on a loopback port) feeding the file exporter
// (github.com/open-telemetry/opentelemetry-collector-contrib/exporter/fileexporter,
// JSON format, one TracesData object per line).
//
// Its tests send hopwise decisions (router + otelx, exported with the
// OpenTelemetry SDK's otlptracehttp exporter) through that pipeline and
// check that `hopwise tune` and `hopwise ab` reach the same result from the
// Collector's file as from hopwise's own otlpfile output of the same
// decisions; that the file exporter needs append: true to survive a
// restart; and, as a benchmark, how the Collector's JSON codec (pdata)
// compares with hopwise's own decoder (see docs/OTLP-CODEC.md).
//
// This is a nested Go module (its own go.mod, with a replace directive to
// the repository root) so that the core module does not depend on the
// Collector. Run it with
//
//	cd otelx/collectortest && go test ./...
package collectortest
