package gw

import "context"

// Prepare exposes the request path up to the upstream call (parsing,
// linking, deciding, rendering and inserting the system message) to the
// package's benchmarks: the body to forward and the route.
func (s *Server) Prepare(body []byte, unit string) ([]byte, string, error) {
	_, rt, out, err := s.prepare(context.Background(), body, unit)
	return out, rt.mode, err
}
