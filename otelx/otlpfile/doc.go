// Package otlpfile writes and reads OTLP JSON Lines trace files: one
// TracesData object per line, in the OTLP/JSON encoding of the
// OpenTelemetry protocol specification (hex trace and span ids,
// lowerCamelCase keys, integer enum values, 64-bit integers as decimal
// strings, bytes values as base64).
//
// Writing goes through the public otlptrace.Client interface, so a file is
// one more OTLP destination:
//
//	client, err := otlpfile.NewClient("traces.jsonl", otlpfile.WithMaxBytes(64<<20))
//	exp, err := otlptrace.New(ctx, client)
//	tp := sdktrace.NewTracerProvider(sdktrace.WithBatcher(exp))
//
// Each UploadTraces call appends exactly one line with a single write, under
// a mutex, so concurrent uploads never interleave. When a line would push the
// file past the size limit the file is rotated first, numbered the way
// logrotate numbers files: name -> name.1 -> name.2 ..., the highest number
// being the oldest, and files past the backup limit are removed.
//
// Reading (Decode, Scanner) decodes the hex ids itself. Plain protojson
// would read them as base64 and yield wrong bytes, which is why this
// package does not use it.
//
// Concurrency: a *Client is safe for concurrent use. A *Scanner is not.
package otlpfile
