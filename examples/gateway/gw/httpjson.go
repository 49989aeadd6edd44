package gw

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"sort"
	"strings"
	"time"
)

// RequestError is a client error with its HTTP status and stable code. Its
// message names the field or byte offset at fault, never an internal path,
// a socket address or a Go type.
type RequestError struct {
	Status int
	Code   string
	Msg    string
}

func (e *RequestError) Error() string { return e.Msg }

func badRequest(code, format string, a ...any) *RequestError {
	return &RequestError{Status: http.StatusBadRequest, Code: code, Msg: fmt.Sprintf(format, a...)}
}

// readBody reads the request body under the size limit and the body
// deadline: 413 past the limit, 408 when the body is slower than timeout.
func readBody(w http.ResponseWriter, r *http.Request, limit int64, timeout time.Duration) ([]byte, error) {
	if timeout > 0 {
		// Not every ResponseWriter supports deadlines (httptest recorders);
		// the server's ReadTimeout still applies then.
		_ = http.NewResponseController(w).SetReadDeadline(time.Now().Add(timeout))
	}
	b, err := io.ReadAll(http.MaxBytesReader(w, r.Body, limit))
	if err == nil && timeout > 0 {
		_ = http.NewResponseController(w).SetReadDeadline(time.Time{})
	}
	if err != nil {
		// The rest of the body will not be read: close the connection
		// after the reply instead of waiting for it.
		w.Header().Set("Connection", "close")
	}
	if err == nil {
		if len(strings.TrimSpace(string(b))) == 0 {
			return nil, badRequest("empty_body", "request body is empty; send a JSON object")
		}
		return b, nil
	}
	var mbe *http.MaxBytesError
	switch {
	case errors.As(err, &mbe):
		return nil, &RequestError{http.StatusRequestEntityTooLarge, "body_too_large", fmt.Sprintf("request body over %d bytes", mbe.Limit)}
	case errors.Is(err, os.ErrDeadlineExceeded):
		return nil, &RequestError{http.StatusRequestTimeout, "body_timeout", fmt.Sprintf("request body not received within %v", timeout)}
	}
	var ne interface{ Timeout() bool }
	if errors.As(err, &ne) && ne.Timeout() {
		return nil, &RequestError{http.StatusRequestTimeout, "body_timeout", "request body not received in time"}
	}
	return nil, badRequest("body_unreadable", "the request body could not be read")
}

// decodeObject decodes a JSON object whose keys must be exactly those of
// fields (key → pointer to the target). Duplicate and case-variant keys,
// unknown keys and wrongly typed values are errors naming the key in JSON's
// terms.
func decodeObject(body []byte, fields map[string]any) error {
	if err := CheckKeys(body); err != nil {
		return badRequest("invalid_json", "%v", err)
	}
	var raw map[string]json.RawMessage
	if err := json.Unmarshal(body, &raw); err != nil {
		return badRequest("invalid_json", "the body must be a JSON object")
	}
	keys := make([]string, 0, len(raw))
	for k := range raw {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		dst, ok := fields[k]
		if !ok {
			for known := range fields {
				if strings.EqualFold(known, k) {
					return badRequest("unknown_field", "unknown field %q (field names are case-sensitive: %q)", clip(k), known)
				}
			}
			return badRequest("unknown_field", "unknown field %q", clip(k))
		}
		if err := json.Unmarshal(raw[k], dst); err != nil {
			var ke *kindError
			if errors.As(err, &ke) {
				return badRequest("invalid_field", "field %q must be a %s", k, ke.kind)
			}
			var te *json.UnmarshalTypeError
			if errors.As(err, &te) {
				return badRequest("invalid_field", "field %q must be a%s %s, got %s", k, article(jsonTypeName(te.Type.String())),
					jsonTypeName(te.Type.String()), te.Value)
			}
			return badRequest("invalid_field", "field %q has an invalid value", k)
		}
	}
	return nil
}

func article(word string) string {
	if word != "" && strings.ContainsRune("aeiou", rune(word[0])) {
		return "n"
	}
	return ""
}

type errorBody struct {
	Error struct {
		Code    string `json:"code"`
		Message string `json:"message"`
	} `json:"error"`
}

// writeErr writes a RequestError as such, and anything else as a generic
// 500 whose detail goes only to the log.
func (s *Server) writeErr(w http.ResponseWriter, err error) {
	var re *RequestError
	if errors.As(err, &re) {
		writeError(w, re.Status, re.Code, re.Msg)
		return
	}
	s.log.Printf("gateway: internal error: %v", err)
	writeError(w, http.StatusInternalServerError, "internal", "internal error; see the gateway log")
}

func writeError(w http.ResponseWriter, status int, code, msg string) {
	var b errorBody
	b.Error.Code, b.Error.Message = code, msg
	writeJSON(w, status, b)
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(status)
	_ = json.NewEncoder(w).Encode(v)
}

func methodNotAllowed(allow string) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Allow", allow)
		writeError(w, http.StatusMethodNotAllowed, "method_not_allowed", "use "+allow)
	}
}

// kindError is returned by a field type's UnmarshalJSON for a value of the
// wrong JSON kind.
type kindError struct{ kind string }

func (e *kindError) Error() string { return "must be a " + e.kind }

// Number is a JSON number kept as written, for range checks before any
// conversion. Unlike json.Number it refuses a string holding a number.
type Number string

// UnmarshalJSON implements json.Unmarshaler.
func (n *Number) UnmarshalJSON(b []byte) error {
	var v json.Number
	if len(b) == 0 || b[0] == '"' || json.Unmarshal(b, &v) != nil {
		return &kindError{"number"}
	}
	*n = Number(v)
	return nil
}

// String returns the number as written.
func (n Number) String() string { return string(n) }
