package gw

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/http"
	"strconv"
	"time"

	"github.com/hopwise/hopwise/otelx"
)

// OutcomeRequest is the body of POST /v1/outcomes: the outcome of the most
// recent routed chat request sent with the same Hopwise-Unit header.
//
//	{"unit":"unit-17","score":1}                                   required
//	{"input_tokens":…,"output_tokens":…,"latency_ms":…}            optional: override what the gateway measured
type OutcomeRequest struct {
	Unit         string  `json:"unit"`
	Score        *Number `json:"score"`
	InputTokens  *Number `json:"input_tokens,omitempty"`
	OutputTokens *Number `json:"output_tokens,omitempty"`
	LatencyMs    *Number `json:"latency_ms,omitempty"`
}

// outcomeFields are the keys decodeObject accepts.
func (o *OutcomeRequest) fields() map[string]any {
	return map[string]any{"unit": &o.Unit, "score": &o.Score, "input_tokens": &o.InputTokens,
		"output_tokens": &o.OutputTokens, "latency_ms": &o.LatencyMs}
}

// number parses a JSON number field within [lo, hi]; integer requires a
// whole number (no fraction; an exponent form is fine when whole).
func number(field string, n *Number, lo, hi float64, integer bool) (float64, error) {
	f, err := strconv.ParseFloat(n.String(), 64)
	if err != nil || math.IsNaN(f) || math.IsInf(f, 0) {
		return 0, badRequest("invalid_field", "field %q must be a finite number", field)
	}
	if integer && f != math.Trunc(f) {
		return 0, badRequest("invalid_field", "field %q must be a whole number, got %s", field, n.String())
	}
	if f < lo || f > hi {
		return 0, badRequest("out_of_range", "field %q must be in [%s, %s], got %s", field,
			strconv.FormatFloat(lo, 'g', -1, 64), strconv.FormatFloat(hi, 'g', -1, 64), n.String())
	}
	return f, nil
}

// Outcome validates the whole outcome first, then takes the pending
// request of req.Unit and records the outcome as a hopwise.outcome span
// joined to the decision by the unit key (otelx.RecordOutcome), with the
// GenAI attributes of the call (otelx.WithOutcomeAttributes).
// Tokens and latency default to what the gateway measured. A request takes
// one outcome; a rejected outcome leaves it pending, so a corrected retry
// records.
func (s *Server) Outcome(ctx context.Context, req OutcomeRequest) error {
	if req.Unit == "" {
		return badRequest("missing_field", "field %q is required", "unit")
	}
	if err := checkUnit("field \"unit\"", req.Unit); err != nil {
		return err
	}
	if req.Score == nil {
		return badRequest("missing_field", "field %q is required", "score")
	}
	score, err := number("score", req.Score, 0, 1, false)
	if err != nil {
		return err
	}
	var in, out, lat *float64
	for _, f := range []struct {
		name    string
		n       *Number
		hi      float64
		integer bool
		dst     **float64
	}{
		{"input_tokens", req.InputTokens, MaxOutcomeTokens, true, &in},
		{"output_tokens", req.OutputTokens, MaxOutcomeTokens, true, &out},
		{"latency_ms", req.LatencyMs, MaxOutcomeLatencyMs, false, &lat},
	} {
		if f.n == nil {
			continue
		}
		v, err := number(f.name, f.n, 0, f.hi, f.integer)
		if err != nil {
			return err
		}
		*f.dst = &v
	}
	p, ok := s.recent.Peek(req.Unit)
	if !ok {
		return &RequestError{http.StatusNotFound, "unknown_unit", fmt.Sprintf("no routed request is pending for unit %q (already reported, forgotten, passed through, or sent without %s)", clip(req.Unit), HeaderUnit)}
	}
	o := otelx.Outcome{Score: score, InputTokens: p.in, OutputTokens: p.out, Latency: p.latency}
	if in != nil {
		o.InputTokens = int64(*in)
	}
	if out != nil {
		o.OutputTokens = int64(*out)
	}
	if lat != nil {
		o.Latency = time.Duration(*lat * float64(time.Millisecond))
	}
	// Remove before recording: of two concurrent reports for one unit, only
	// the one whose Remove finds it records.
	if !s.recent.Remove(req.Unit) {
		return &RequestError{http.StatusNotFound, "unknown_unit", fmt.Sprintf("no routed request is pending for unit %q (already reported)", clip(req.Unit))}
	}
	if err := s.tel.RecordOutcome(ctx, p.d, o, otelx.WithOutcomeAttributes(s.ins.outcomeAttrs(p, o)...)); err != nil {
		s.recent.ContainsOrAdd(req.Unit, p) // keep it for a retry
		if errors.Is(err, otelx.ErrBadOutcome) {
			return badRequest("invalid_field", "the outcome is out of range")
		}
		return err
	}
	return nil
}

func (s *Server) handleOutcome(w http.ResponseWriter, r *http.Request) {
	body, err := readBody(w, r, s.cfg.MaxBodyBytes, s.cfg.BodyTimeout)
	if err != nil {
		s.writeErr(w, err)
		return
	}
	var q OutcomeRequest
	if err := decodeObject(body, q.fields()); err != nil {
		s.writeErr(w, err)
		return
	}
	if err := s.Outcome(r.Context(), q); err != nil {
		s.writeErr(w, err)
		return
	}
	writeJSON(w, http.StatusOK, map[string]string{"status": "recorded", "unit": q.Unit})
}
