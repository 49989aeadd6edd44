// Package gw is the library part of the gateway example: a chat-completions
// reverse proxy that routes each request with the hopwise router before it
// reaches the model.
//
// Per POST /v1/chat/completions (JSON, or SSE with "stream": true):
//
//  1. the body is read under Config.MaxBodyBytes (413) and
//     Config.BodyTimeout (408), and checked by CheckKeys: duplicate or
//     case-variant keys anywhere are a 400, before anything acts on it;
//  2. the last user message is linked to the index's entities
//     (graphidx.Lexicon.Link) and a query is formed (Former); a message
//     that asks nothing the router can decide passes through untouched,
//     with the reason (the Pass* codes) in the Hopwise-Reason header, on the
//     span and in the route counter;
//  3. the router decides under Config.DecideTimeout (otelx.Decide, so the
//     decision span keeps its hopwise.* attributes); a deadline that passes
//     before the search starts degrades to a direct decision with reason
//     decide-timeout;
//  4. the Renderer's text (the chain's steps, or the instruction to answer
//     directly; the built-in PlanRenderer keeps rendered texts per decision
//     in a PlanCache of Config.PlanCacheSize) is spliced in as a system
//     message before the last user message, the rest of the body forwarded
//     byte for byte, to Config.Upstream + "/chat/completions" inside a
//     GenAI client span ("chat {model}");
//  5. the answer is relayed (SSE line by line, flushed per event); the model
//     and usage are read from the JSON answer or from the stream chunk that
//     carries them (the final one when stream_options.include_usage is set).
//
// Upstream faults: a timeout (Config.UpstreamTimeout) is 504
// upstream_timeout, a refused connection 502 upstream_refused, other
// transport failures 502 upstream_unreachable; an upstream 4xx or 5xx is
// passed through with its status and body. No error message carries an
// internal path, a socket address or a Go type name; details go to the log.
//
// Other endpoints:
//
//	POST /v1/outcomes        {"unit":"u-17","score":1}  (optional input_tokens, output_tokens, latency_ms)
//	POST /v1/route           {"from","value","to","unit"}: the decision and the rendered text, no model call
//	GET  /healthz            {"status":"ok","generation":…,"reloads":n,"uptime_seconds":s,"routing":true}
//	GET  /metrics            Config.Metrics (NewPrometheus), when set
//	POST /admin/reload-index reopen the index file and swap it in (Config.AdminToken)
//
// The unit key (header Hopwise-Unit, at most MaxUnitBytes) is the A/B unit
// and the join key of the outcome; the gateway keeps the most recent routed
// request per unit (Config.OutcomeSize of them) until its outcome arrives.
//
// Telemetry: the model-call span and the outcome span carry the
// OpenTelemetry GenAI semantic-convention attributes gen_ai.operation.name,
// gen_ai.request.model, gen_ai.response.model, gen_ai.usage.input_tokens and
// gen_ai.usage.output_tokens (the outcome span through
// otelx.WithOutcomeAttributes);
// the metrics are gen_ai.client.operation.duration,
// gen_ai.client.token.usage and hopwise.gateway.requests.
//
// Cost: the body is walked in place (CheckKeys and the chat fields in
// O(body), no decoding of what the gateway does not read), and the decide
// deadline's timer starts only when a search waits on it, so a request
// whose decision comes from the router's cache adds a few microseconds of
// CPU to the proxy's own work: linking the message, the cache look-ups and
// the splice (BenchmarkPrepare and BenchmarkChat measure it in thread CPU
// against routing off in the same run; cmd/gwload under load).
//
// Concurrency: a *Server is safe for concurrent use; reloads are serialised
// and hold requests back only while the linker is swapped.
package gw
