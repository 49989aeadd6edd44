package gw

import (
	"context"
	"errors"
	"fmt"
	"net/http"

	"github.com/hopwise/hopwise/router"
)

// RouteRequest is the body of POST /v1/route: a structured query, routed
// and rendered without calling the model (to inspect what the gateway
// would add to a chat request).
type RouteRequest struct {
	From  string `json:"from"`
	Value string `json:"value"`
	To    string `json:"to"`
	Unit  string `json:"unit,omitempty"`
}

// RouteResponse is the reply of POST /v1/route.
type RouteResponse struct {
	Mode        string   `json:"mode"`
	Bridges     []string `json:"bridges,omitempty"`
	Parallel    bool     `json:"parallel,omitempty"` // the two bridges are read side by side (router.ChainResult.Parallel)
	Midpoint    bool     `json:"midpoint,omitempty"` // its estimate is the midpoint with a one-bridge chain (router.ChainResult.Midpoint)
	Reason      string   `json:"reason"`
	Explanation string   `json:"explanation"`
	Gain        float64  `json:"gain"`
	DirectErr   float64  `json:"direct_error"`
	ChainErr    *float64 `json:"chain_error,omitempty"`
	Support     uint64   `json:"support"`
	Arm         string   `json:"arm,omitempty"`
	Truncated   bool     `json:"truncated"`
	Generation  string   `json:"generation"`
	Instruction string   `json:"instruction"`
}

func (s *Server) handleRoute(w http.ResponseWriter, r *http.Request) {
	body, err := readBody(w, r, s.cfg.MaxBodyBytes, s.cfg.BodyTimeout)
	if err != nil {
		s.writeErr(w, err)
		return
	}
	var q RouteRequest
	if err := decodeObject(body, map[string]any{"from": &q.From, "value": &q.Value, "to": &q.To, "unit": &q.Unit}); err != nil {
		s.writeErr(w, err)
		return
	}
	for _, f := range []struct{ name, v string }{{"from", q.From}, {"value", q.Value}, {"to", q.To}} {
		if f.v == "" {
			s.writeErr(w, badRequest("missing_field", "field %q is required", f.name))
			return
		}
		if len(f.v) > MaxNameBytes {
			s.writeErr(w, badRequest("field_too_long", "field %q is %d bytes, the limit is %d", f.name, len(f.v), MaxNameBytes))
			return
		}
	}
	if err := checkUnit("field \"unit\"", q.Unit); err != nil {
		s.writeErr(w, err)
		return
	}
	rq := router.Query{From: q.From, Value: q.Value, To: q.To, Key: q.Unit}
	dctx, cancel := context.WithTimeout(r.Context(), s.cfg.DecideTimeout)
	d, err := s.decideQuery(r.Context(), dctx, rq)
	cancel()
	if err != nil {
		s.writeErr(w, classify(err))
		return
	}
	s.lmu.RLock()
	instr, err := s.lk.renderer.Render(r.Context(), rq, d)
	s.lmu.RUnlock()
	if err != nil {
		s.writeErr(w, err)
		return
	}
	resp := RouteResponse{Mode: d.Mode.String(), Bridges: d.Bridges, Reason: d.Reason.Code, Explanation: d.Reason.Text,
		Gain: d.Gain, DirectErr: d.Direct.Err, Support: d.Direct.Support, Arm: d.Arm, Truncated: d.Truncated,
		Generation: fmt.Sprintf("%016x", d.Generation), Instruction: instr}
	if d.Chain != nil {
		e := d.Chain.Err
		resp.ChainErr = &e
		resp.Parallel = d.Mode == router.ModeChain && d.Chain.Parallel
		resp.Midpoint = resp.Parallel && d.Chain.Midpoint
	}
	writeJSON(w, http.StatusOK, resp)
}

// classify maps router and context errors to request errors whose
// messages name the field, never the Go error.
func classify(err error) error {
	switch {
	case errors.Is(err, router.ErrSameEntity):
		return badRequest("same_entity", "from and to name the same entity")
	case errors.Is(err, router.ErrUnknownEntity):
		return &RequestError{http.StatusUnprocessableEntity, "unknown_entity", "the index does not know the entity in from or to"}
	case errors.Is(err, router.ErrUnknownValue):
		return &RequestError{http.StatusUnprocessableEntity, "unknown_value", "the index does not know that value of from"}
	case errors.Is(err, context.DeadlineExceeded):
		return &RequestError{http.StatusGatewayTimeout, "timeout", "the routing decision timed out"}
	}
	return err
}
