// Package gw is the library part of the gateway example: a small net/http
// service that embeds the hopwise router in front of a pluggable Answerer.
//
// API (JSON over HTTP, our own):
//
//	POST /v1/answer           {"from":"zone-2/thermometer","value":"reads-cool","to":"zone-6/vent-a","key":"unit-17"}
//	                          → 200 {"key":…,"answer":{"value":…,"distribution":{…},"steps":[…]},
//	                                 "route":{"mode":"chain","bridges":[…],"reason":…,…},"usage":{…},"elapsed_ms":…}
//	POST /v1/feedback         {"key":"unit-17","score":1}   (optional input_tokens, output_tokens, latency_ms)
//	                          → 200 {"status":"recorded","key":…}: a hopwise.outcome span joined by key
//	GET  /healthz             → 200 {"status":"ok","generation":"<hex>","reloads":n,"uptime_seconds":s}
//	POST /admin/reload-index  → 200 {"status":"reloaded","generation":…,"previous_generation":…}
//
// Every error is a JSON object {"error":{"code":"…","message":"…"}} with a
// 4xx status for bad requests (400 malformed or missing fields, 413 body too
// large, 422 unknown entity or value, 404 unknown feedback key, 405 wrong
// method, 401 missing admin token) and 5xx for server faults (503 closed, 504 timeout).
//
// Each /v1/answer request runs under Config.RequestTimeout; the routing
// decision gets Config.DecideTimeout of it. A deadline reached during the
// bridge search truncates the search; one that passes before the search
// starts (an overloaded process) degrades to a direct answer with reason
// "decide-timeout" instead of failing the request. Decisions are
// traced through otelx; the trace exporter is chosen by the caller (see the
// gateway command: an OTLP JSON Lines file or OTLP/HTTP).
//
// The bundled Sim answerer models a language model trained on the local
// corpus (see Sim).
//
// Concurrency: a *Server is safe for concurrent use; reloads are serialised
// and never block answers for longer than the answerer's index swap.
package gw
