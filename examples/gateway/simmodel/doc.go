// Package simmodel is a simulated upstream model server for the gateway:
// it speaks the chat-completions wire format (POST /v1/chat/completions,
// JSON, or SSE with stream: true and, when stream_options.include_usage is
// set, a final chunk carrying the usage) and answers greenhouse questions
// from the local conditionals of a locality index, as a language model
// trained on that corpus would.
//
// It reads the question ("… bed-11/moisture-probe is reads-wet … what is
// bed-10/leaf-wilt …") with the same lexicon linking as the gateway. With no
// plan it answers directly from the endpoints' own conditional; when a
// system message names entities between the two endpoints (the gateway's
// rendered plan), it reasons through them in order, one local conditional
// per step, and writes one line per step. Token counts are computed from
// the text (about four characters per token, common practice for English
// text), so step-by-step answers cost more output tokens.
//
// Concurrency: a *Model is safe for concurrent use.
package simmodel
