// Package otelx instruments routing decisions with OpenTelemetry traces and
// metrics, and reads the resulting OTLP JSON Lines trace files back into
// typed records for tuning and A/B analysis.
//
// # Instrumenting
//
// New takes providers, never a Tracer or Meter (WithTracerProvider,
// WithMeterProvider; both default to the otel globals). The scope name is
// ScopeName, the import path, with Version. Instrumentation.Decide wraps
// router.Router.Decide in one span named SpanDecide whose attributes live in
// the hopwise. namespace (the Key* constants: mode, gain, direct error and
// support, chain error, hops and bridges, reason, truncation, arm,
// propensity, exploration, index generation, sampling ratio, unit key).
// They are built only when the span is recording. Metrics: the decision
// latency histogram by mode, arm and cache result (hit or miss), whose
// count is the number of decisions, and the gain; their
// attribute sets and measurement options are prebuilt, and every call is
// guarded by the instrument's Enabled. The otel noop providers are
// recognised and cost nothing per decision. The otel globals are ordinary
// providers: before an SDK is installed behind them a decision starts a
// non-recording span (3 small allocations); a process that never installs
// an SDK should pass the noop providers.
//
// WithEntityHashKey replaces entity names and values in spans by a keyed
// HMAC-SHA256 (RFC 2104), truncated to 128 bits. WithSamplingRatio records
// the trace sampling ratio in use on every span, because the SDK samplers
// do not: readers weight each decision by its inverse.
//
// # Cost
//
// With the noop providers a decision pays one call (the 248-byte Decision
// is copied once more). Through the otel globals with no SDK it also starts
// a non-recording span, which an eBPF auto-instrumentation hooking the
// global tracer can see. With
// the SDK, nearly all of the cost is the SDK's own: starting and ending a
// span, a cost per attribute and, once a span has more than 8 attributes,
// a hash table of 3 more allocations (BenchmarkSpanAttrCount, SDK v1.47),
// and each metric measurement and exemplar. The default decision span has
// 10 to 21 attributes (15 with a unit key, an arm and a chain);
// WithCompactSpans keeps 8 or fewer in the common case, and a ratio
// sampler (with WithSamplingRatio) skips the attributes of the spans it
// drops. TestOverhead (HOPWISE_STRESS=1) measures each setup against the
// plain router.
//
// Traces that feed tuning and A/B analysis must not lose spans silently: a
// batch span processor drops spans when its queue is full, which acts as
// sampling that no span records. Give it sdktrace.WithBlocking() or a queue
// large enough for the peak rate, and check the SDK's dropped-span count.
// NewDropCounter wraps an exporter so that the spans of failed exports (a
// full disk, an unreachable collector) are counted in MetricSpansDropped.
//
// RecordOutcome reports the gateway's outcome (score in [0,1], tokens,
// latency) in a span named SpanOutcome carrying the decision's unit key
// (WithOutcomeAttributes adds the caller's own attributes to it, such as
// the GenAI attributes of the model call); ReadOutcomes reads the same facts from a plain JSONL file instead. Join
// pairs decisions with outcomes by key.
//
// # Trace files
//
// Package otlpfile writes OTLP JSON Lines through the public
// otlptrace.Client interface (one TracesData object per line, hex ids) and
// scans them back. ReadTraces and ReadTraceFiles turn such files into
// DecisionRecord and OutcomeRecord values; any malformed line or mistyped
// attribute is an error naming the file and line.
//
// Concurrency: an *Instrumentation is safe for concurrent use. Readers
// are not; use one per goroutine.
package otelx
