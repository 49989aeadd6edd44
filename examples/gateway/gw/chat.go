package gw

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"strings"
	"syscall"
	"time"
	"unicode"
	"unicode/utf8"

	"github.com/hopwise/hopwise/router"
	"go.opentelemetry.io/otel/attribute"
	"go.opentelemetry.io/otel/codes"
)

// chatRequest is the part of a chat-completions body the gateway reads.
// Everything else is forwarded as sent.
type chatRequest struct {
	body []byte
	// messages are the elements of the messages array as sent (sub-slices
	// of body), msgAt their byte offsets in body.
	messages []json.RawMessage
	msgAt    []int
	// msgStart and msgEnd are the byte span of the messages array in body.
	msgStart, msgEnd int
	model            string
	stream           bool
}

// parseChat checks and splits a chat-completions body. Top-level keys are
// matched exactly (CheckKeys has rejected case variants); the messages
// array and its elements are located by byte offset, so that a plan can be
// spliced in without re-encoding the rest of the body. Cost: O(n) in the
// body size (CheckKeys, then one walk of the top-level object).
func parseChat(body []byte) (chatRequest, error) {
	c := chatRequest{body: body, msgStart: -1}
	if err := CheckKeys(body); err != nil {
		return c, badRequest("invalid_json", "%v", err)
	}
	i := skipWS(body, 0)
	if body[i] != '{' { // CheckKeys accepted it: valid JSON, not empty
		return c, badRequest("invalid_json", "the body must be a JSON object")
	}
	var ferr error
	eachMember(body, i, func(key []byte, vs, ve int) bool {
		raw := body[vs:ve]
		switch string(key) {
		case "messages":
			if raw[0] != '[' {
				ferr = badRequest("invalid_field", "field %q must be an array of objects", "messages")
				return false
			}
			c.msgStart, c.msgEnd = vs, ve
			eachElement(body, vs, func(es, ee int) {
				c.messages = append(c.messages, body[es:ee:ee])
				c.msgAt = append(c.msgAt, es)
			})
		case "model":
			m, ok := jsonString(raw)
			if !ok {
				ferr = badRequest("invalid_field", "field %q must be a string", "model")
				return false
			}
			c.model = m
		case "stream":
			switch string(raw) {
			case "null":
			case "true", "false":
				c.stream = string(raw) == "true"
			default:
				ferr = badRequest("invalid_field", "field %q must be a boolean", "stream")
				return false
			}
		}
		return true
	})
	if ferr != nil {
		return c, ferr
	}
	if c.msgStart < 0 {
		return c, badRequest("missing_field", "field %q is required", "messages")
	}
	return c, nil
}

// lastUserText returns the text of the last user message and its index:
// a string content, or the text parts of an array content joined by
// newlines. Keys are matched exactly, as the upstream reads them.
func (c *chatRequest) lastUserText() (string, int) {
	for i := len(c.messages) - 1; i >= 0; i-- {
		m := c.messages[i]
		if m[0] != '{' {
			continue
		}
		var role, raw []byte
		eachMember(m, 0, func(key []byte, vs, ve int) bool {
			switch string(key) {
			case "role":
				role = m[vs:ve]
			case "content":
				raw = m[vs:ve]
			}
			return true
		})
		if r, ok := jsonString(role); !ok || r != "user" {
			continue
		}
		if s, ok := jsonString(raw); ok {
			return s, i
		}
		var parts []map[string]json.RawMessage
		if len(raw) > 0 && raw[0] == '[' && json.Unmarshal(raw, &parts) == nil {
			var b strings.Builder
			for _, p := range parts {
				var typ, text string
				if json.Unmarshal(p["type"], &typ) == nil && typ == "text" && json.Unmarshal(p["text"], &text) == nil {
					if b.Len() > 0 {
						b.WriteByte('\n')
					}
					b.WriteString(text)
				}
			}
			return b.String(), i
		}
		return "", i
	}
	return "", -1
}

// systemOpen and systemClose wrap the content of the system message that
// withSystem inserts.
const (
	systemOpen  = `{"role":"system","content":`
	systemClose = `},`
)

// withSystem returns the body with a system message carrying text inserted
// before message at: the body is copied byte for byte with the message
// spliced in at that element's offset.
func (c *chatRequest) withSystem(text string, at int) []byte {
	off := c.msgAt[at]
	out := make([]byte, 0, len(c.body)+len(systemOpen)+len(systemClose)+len(text)+len(text)/8+2)
	out = append(out, c.body[:off]...)
	out = append(out, systemOpen...)
	out = appendJSONString(out, text)
	out = append(out, systemClose...)
	return append(out, c.body[off:]...)
}

// appendJSONString appends s as a JSON string: quote and backslash escaped,
// control characters as \n, \r, \t or \u00XX, U+2028 and U+2029 as \u
// escapes (as encoding/json writes them), invalid UTF-8 as U+FFFD;
// everything else as is. O(len(s)).
func appendJSONString(dst []byte, s string) []byte {
	const hex = "0123456789abcdef"
	dst = append(dst, '"')
	start := 0
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c >= 0x20 && c != '"' && c != '\\' {
				i++
				continue
			}
			dst = append(dst, s[start:i]...)
			switch c {
			case '"', '\\':
				dst = append(dst, '\\', c)
			case '\n':
				dst = append(dst, '\\', 'n')
			case '\r':
				dst = append(dst, '\\', 'r')
			case '\t':
				dst = append(dst, '\\', 't')
			default:
				dst = append(dst, '\\', 'u', '0', '0', hex[c>>4], hex[c&0xf])
			}
			i++
			start = i
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			dst = append(dst, s[start:i]...)
			dst = append(dst, "\\ufffd"...)
			i += size
			start = i
			continue
		}
		if r == '\u2028' || r == '\u2029' {
			dst = append(dst, s[start:i]...)
			dst = append(dst, '\\', 'u', '2', '0', '2', hex[r&0xf])
			i += size
			start = i
			continue
		}
		i += size
	}
	dst = append(dst, s[start:]...)
	return append(dst, '"')
}

// checkUnit validates a unit key.
func checkUnit(field, u string) error {
	if len(u) > MaxUnitBytes {
		return badRequest("field_too_long", "%s is %d bytes, the limit is %d", field, len(u), MaxUnitBytes)
	}
	if !utf8.ValidString(u) {
		return badRequest("invalid_field", "%s is not valid UTF-8", field)
	}
	for _, r := range u {
		if unicode.IsControl(r) {
			return badRequest("invalid_field", "%s contains a control character", field)
		}
	}
	return nil
}

// route is what the gateway did with one request.
type route struct {
	mode    string // "chain", "direct" or "pass"
	reason  string
	d       router.Decision
	decided bool
}

// decide forms the query from text, decides under the decide deadline and
// renders the instruction. It never fails the request for a routing
// reason: what it cannot route passes through with the reason.
func (s *Server) decide(ctx context.Context, text, unit string) (route, string, error) {
	if s.cfg.RoutingOff {
		return route{mode: "pass", reason: PassRoutingOff}, "", nil
	}
	s.lmu.RLock()
	defer s.lmu.RUnlock()
	// Linking and deciding each get DecideTimeout, as deadlines whose
	// timers start only when something waits on them (a search does): a
	// decision from the router's cache costs no timer.
	fctx, fcancel := withLazyDeadline(ctx, s.cfg.DecideTimeout)
	q, reason, ok := s.lk.former.Form(fctx, text, unit)
	fcancel()
	if !ok {
		return route{mode: "pass", reason: reason}, "", nil
	}
	q.Key = unit
	dctx, cancel := withLazyDeadline(ctx, s.cfg.DecideTimeout)
	defer cancel()
	d, err := s.decideQuery(ctx, dctx, q)
	if err != nil {
		switch {
		case errors.Is(err, router.ErrUnknownEntity), errors.Is(err, router.ErrUnknownValue):
			return route{mode: "pass", reason: PassUnknown}, "", nil
		case errors.Is(err, router.ErrSameEntity):
			return route{mode: "pass", reason: PassOneEntity}, "", nil
		}
		return route{}, "", err
	}
	instr, err := s.lk.renderer.Render(ctx, q, d)
	if err != nil {
		// A plan that cannot be built (the index was swapped between the
		// decision and the plan) or rendered: forward untouched.
		s.log.Printf("gateway: rendering the plan: %v", err)
		return route{mode: "pass", reason: PassRender}, "", nil
	}
	return route{mode: d.Mode.String(), reason: d.Reason.Code, d: d, decided: true}, instr, nil
}

// decideQuery runs the traced decision under dctx, ctx under the decide
// deadline. A deadline that passes before the search starts degrades to a
// direct decision with reason decide-timeout.
func (s *Server) decideQuery(ctx, dctx context.Context, q router.Query) (router.Decision, error) {
	d, err := s.tel.Decide(dctx, s.rt, q)
	if err == nil {
		return d, nil
	}
	if errors.Is(err, router.ErrClosed) {
		return d, &RequestError{http.StatusServiceUnavailable, "closed", "the gateway is shutting down"}
	}
	if !errors.Is(err, context.DeadlineExceeded) || ctx.Err() != nil {
		return d, err
	}
	return router.Decision{Mode: router.ModeDirect, Key: q.Key, Propensity: 1, Generation: s.rt.Generation(),
		Reason: router.Reason{Code: ReasonDecideTimeout, Text: fmt.Sprintf("no routing decision within %v; answered directly", s.cfg.DecideTimeout)}}, nil
}

// prepare parses a chat body and routes it: the request as parsed, the
// route taken and the body to forward (body itself when nothing is added).
func (s *Server) prepare(ctx context.Context, body []byte, unit string) (chatRequest, route, []byte, error) {
	c, err := parseChat(body)
	if err != nil {
		return c, route{}, nil, err
	}
	text, at := c.lastUserText()
	rt := route{mode: "pass", reason: PassNoUserMessage}
	if at < 0 || strings.TrimSpace(text) == "" {
		return c, rt, body, nil
	}
	rt, instr, err := s.decide(ctx, text, unit)
	if err != nil || !rt.decided {
		return c, rt, body, err
	}
	return c, rt, c.withSystem(instr, at), nil
}

func (s *Server) handleChat(w http.ResponseWriter, r *http.Request) {
	start := time.Now()
	body, err := readBody(w, r, s.cfg.MaxBodyBytes, s.cfg.BodyTimeout)
	if err != nil {
		s.writeErr(w, err)
		return
	}
	unit := r.Header.Get(HeaderUnit)
	if err := checkUnit("header "+HeaderUnit, unit); err != nil {
		s.writeErr(w, err)
		return
	}
	ctx := r.Context()
	c, rt, out, err := s.prepare(ctx, body, unit)
	if err != nil {
		if errors.Is(err, context.Canceled) && ctx.Err() != nil {
			return // the client went away
		}
		s.writeErr(w, err)
		return
	}
	s.ins.routed(ctx, rt)
	w.Header().Set(HeaderRoute, rt.mode)
	w.Header().Set(HeaderReason, rt.reason)
	if rt.d.Arm != "" {
		w.Header().Set(HeaderArm, rt.d.Arm)
	}
	// The decision is kept for its outcome before the answer's last bytes
	// reach the client: a client that posts its outcome as soon as it holds
	// the answer finds the decision already waiting.
	s.forward(w, r, c, rt, out, func(u usage) {
		if rt.decided && unit != "" {
			s.recent.Add(unit, pending{d: rt.d, in: u.in, out: u.out, latency: time.Since(start), reqModel: c.model, respModel: u.model})
		}
	})
}

// usage is what the gateway learnt from the upstream's answer.
type usage struct {
	ok      bool // a 2xx answer was relayed whole
	in, out int64
	model   string
	has     bool // the upstream reported usage
}

// forward sends body upstream under UpstreamTimeout inside a GenAI client
// span and relays the answer, recording usage. complete is called once,
// with the usage, when a 2xx answer has been read whole and before its last
// bytes are written to the client (for a stream: before the data: [DONE]
// line, or at the end of a stream that has none); it is not called for a
// failed or cut answer.
func (s *Server) forward(w http.ResponseWriter, r *http.Request, c chatRequest, rt route, body []byte, complete func(usage)) (u usage) {
	ctx, cancel := context.WithTimeout(r.Context(), s.cfg.UpstreamTimeout)
	defer cancel()
	ctx, span := s.ins.startCall(ctx, c.model, rt)
	start := time.Now()
	errType := ""
	defer func() {
		s.ins.endCall(ctx, span, c.model, u, errType, time.Since(start))
	}()
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, s.upstream, bytes.NewReader(body))
	if err != nil {
		errType = "request"
		s.writeErr(w, err)
		return u
	}
	req.Header.Set("Content-Type", "application/json")
	for _, h := range []string{"Accept", "Accept-Language", "User-Agent", "Authorization"} {
		if v := r.Header.Values(h); len(v) > 0 {
			req.Header[h] = v
		}
	}
	if s.cfg.UpstreamAuth != "" {
		req.Header.Set("Authorization", s.cfg.UpstreamAuth)
	}
	resp, err := s.client.Do(req)
	if err != nil {
		errType = s.upstreamFault(w, r, err)
		span.SetStatus(codes.Error, errType)
		return u
	}
	defer resp.Body.Close()
	for _, h := range []string{"Content-Type", "Retry-After", "Cache-Control"} {
		if v := resp.Header.Get(h); v != "" {
			w.Header().Set(h, v)
		}
	}
	if resp.StatusCode >= 300 {
		errType = fmt.Sprint(resp.StatusCode)
		span.SetStatus(codes.Error, "upstream status "+errType)
		w.WriteHeader(resp.StatusCode)
		_, _ = io.Copy(w, io.LimitReader(resp.Body, s.cfg.MaxResponseBytes))
		return u
	}
	if strings.HasPrefix(resp.Header.Get("Content-Type"), "text/event-stream") {
		w.WriteHeader(resp.StatusCode)
		done := false
		finish := func() {
			if !done {
				done = true
				u.ok = true
				complete(u)
			}
		}
		if err := s.relayStream(ctx, w, resp.Body, &u, finish); err != nil {
			errType = "stream"
			span.SetStatus(codes.Error, "stream cut: "+err.Error())
			s.log.Printf("gateway: upstream stream ended early: %v", err)
			return u
		}
		finish()
		return u
	}
	b, err := io.ReadAll(io.LimitReader(resp.Body, s.cfg.MaxResponseBytes+1))
	if err != nil || int64(len(b)) > s.cfg.MaxResponseBytes {
		if err != nil {
			errType = s.upstreamFault(w, r, err)
		} else {
			errType = "too_large"
			writeError(w, http.StatusBadGateway, "upstream_too_large", fmt.Sprintf("the upstream answer is over %d bytes", s.cfg.MaxResponseBytes))
		}
		span.SetStatus(codes.Error, errType)
		return u
	}
	u.read(b)
	u.ok = true
	complete(u)
	w.WriteHeader(resp.StatusCode)
	_, _ = w.Write(b)
	return u
}

// upstreamFault answers a failed upstream exchange: 504 on a timeout, 502
// when the connection was refused or failed. The message names neither the
// address nor the error's type; the log gets the detail.
func (s *Server) upstreamFault(w http.ResponseWriter, r *http.Request, err error) string {
	if r.Context().Err() != nil {
		return "canceled" // the client went away: nobody to answer
	}
	var ne net.Error
	switch {
	case errors.Is(err, context.DeadlineExceeded) || (errors.As(err, &ne) && ne.Timeout()):
		writeError(w, http.StatusGatewayTimeout, "upstream_timeout", fmt.Sprintf("the upstream model did not answer within %v", s.cfg.UpstreamTimeout))
		return "timeout"
	case errors.Is(err, syscall.ECONNREFUSED):
		s.log.Printf("gateway: upstream refused the connection: %v", err)
		writeError(w, http.StatusBadGateway, "upstream_refused", "the upstream model refused the connection")
		return "refused"
	}
	s.log.Printf("gateway: upstream exchange failed: %v", err)
	writeError(w, http.StatusBadGateway, "upstream_unreachable", "the upstream model could not be reached")
	return "unreachable"
}

// wireUsage is the usage object of the chat-completions wire format.
type wireUsage struct {
	PromptTokens     int64 `json:"prompt_tokens"`
	CompletionTokens int64 `json:"completion_tokens"`
}

// read takes the model and the usage of a JSON answer or one stream chunk.
func (u *usage) read(b []byte) {
	var a struct {
		Model string     `json:"model"`
		Usage *wireUsage `json:"usage"`
	}
	if json.Unmarshal(b, &a) != nil {
		return
	}
	if a.Model != "" {
		u.model = a.Model
	}
	if a.Usage != nil && a.Usage.PromptTokens >= 0 && a.Usage.CompletionTokens >= 0 {
		u.in, u.out, u.has = a.Usage.PromptTokens, a.Usage.CompletionTokens, true
	}
}

// relayStream copies an SSE stream line by line, flushing at the end of
// every event, and reads the model and the usage from the data lines
// (the final chunk carries the usage when the client asked for it).
// atDone is called just before the data: [DONE] line is written.
func (s *Server) relayStream(ctx context.Context, w http.ResponseWriter, body io.Reader, u *usage, atDone func()) error {
	rc := http.NewResponseController(w)
	br := bufio.NewReaderSize(body, 32<<10)
	var long []byte
	for {
		line, err := br.ReadSlice('\n')
		if errors.Is(err, bufio.ErrBufferFull) {
			if int64(len(long)+len(line)) > s.cfg.MaxResponseBytes {
				return fmt.Errorf("an event line is over %d bytes", s.cfg.MaxResponseBytes)
			}
			long = append(long, line...)
			continue
		}
		if long != nil {
			line = append(long, line...)
			long = nil
		}
		if len(line) > 0 {
			if data, ok := bytes.CutPrefix(line, []byte("data:")); ok {
				data = bytes.TrimSpace(data)
				if (u.model == "" || bytes.Contains(data, []byte(`"usage"`))) && len(data) > 0 && data[0] == '{' {
					u.read(data)
				}
				if string(data) == "[DONE]" {
					atDone()
				}
			}
			if _, werr := w.Write(line); werr != nil {
				return errors.New("the client went away")
			}
			if len(bytes.TrimSpace(line)) == 0 {
				_ = rc.Flush()
			}
		}
		if err == io.EOF {
			_ = rc.Flush()
			return nil
		}
		if err != nil {
			if ctx.Err() != nil {
				return errors.New("the upstream timed out")
			}
			return errors.New("the upstream stream failed")
		}
	}
}

// genAI attribute keys (OpenTelemetry GenAI semantic conventions).
const (
	KeyGenAIOperation    = "gen_ai.operation.name"
	KeyGenAIProvider     = "gen_ai.provider.name"
	KeyGenAIRequestModel = "gen_ai.request.model"
	KeyGenAIRespModel    = "gen_ai.response.model"
	KeyGenAIInputTokens  = "gen_ai.usage.input_tokens"
	KeyGenAIOutputTokens = "gen_ai.usage.output_tokens"
	KeyGenAITokenType    = "gen_ai.token.type"
	KeyErrorType         = "error.type"
	// Gateway attributes of the model-call span and the route counter.
	KeyGatewayRoute  = "hopwise.gateway.route"  // chain, direct or pass
	KeyGatewayReason = "hopwise.gateway.reason" // route or pass-through reason
)

func genAICallAttrs(model string) []attribute.KeyValue {
	return []attribute.KeyValue{attribute.String(KeyGenAIOperation, "chat"), attribute.String(KeyGenAIRequestModel, model)}
}
