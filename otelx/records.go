package otelx

import (
	"bufio"
	"bytes"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"time"

	commonpb "go.opentelemetry.io/proto/otlp/common/v1"
	tracepb "go.opentelemetry.io/proto/otlp/trace/v1"

	"github.com/hopwise/hopwise/otelx/otlpfile"
)

// ErrBadRecord is wrapped by errors about a decision or outcome record
// whose attributes or fields have the wrong type or an out-of-range value.
// The message names the file, line and attribute or field.
var ErrBadRecord = errors.New("otelx: bad trace record")

// DecisionRecord is one decision span read back from a trace file.
type DecisionRecord struct {
	Source          string // file:line
	TraceID, SpanID string // lowercase hex
	Start           time.Time
	Duration        time.Duration

	Key, From, Value, To string // From/Value/To maybe hashed
	Mode                 string // "direct" or "chain"
	Gain, Score          float64
	// Err is the expected error of the chosen estimate (ChainErr or
	// DirectErr by Mode; 0 for a chain fallback without a chain).
	Err       float64
	Reason    string
	Truncated bool
	Explored  bool
	Cached    bool
	// Propensity is the logged probability of Mode; NaN when the span has
	// none (see HasPropensity).
	Propensity float64

	// DirectErr and ChainErr are 0 when the span does not carry them:
	// compact spans (WithCompactSpans) record the error of the chosen
	// mode only.
	DirectErr     float64
	DirectSupport uint64

	HasChain  bool // the span has a chain error or a hop count
	ChainErr  float64
	ChainHops int
	Bridges   []string
	// ChainParallel: the chain's bridges are read side by side
	// (KeyChainParallel).
	ChainParallel bool
	// ChainMidpoint: its estimate is the midpoint with a one-bridge chain
	// (KeyChainMidpoint).
	ChainMidpoint bool

	Arm        string
	Generation string
	// SamplingRatio is the trace sampling ratio in force (1 when absent);
	// weight the decision by 1/SamplingRatio.
	SamplingRatio float64
}

// HasPropensity reports whether the span carried a propensity.
func (d *DecisionRecord) HasPropensity() bool { return !math.IsNaN(d.Propensity) }

// OutcomeRecord is an outcome read from a trace file (SpanOutcome) or from
// a plain outcomes JSONL file.
type OutcomeRecord struct {
	Source       string // file:line
	Key          string
	Score        float64
	InputTokens  int64
	OutputTokens int64
	LatencyMs    float64
	// Mode and Arm are copied from the decision by RecordOutcome; empty
	// in plain outcome files.
	Mode, Arm     string
	Time          time.Time
	SamplingRatio float64
}

// Ranges of the numeric outcome fields. Readers reject values outside
// them, naming the file, line and field, so that sums over any number of
// outcomes stay exact: two counts of at most 2^40 add without overflow,
// and float64 sums of up to 2^12 such totals stay integral.
const (
	// MaxTokens bounds input and output token counts of one outcome
	// (2^40 ≈ 1.1e12, far above any context window).
	MaxTokens = int64(1) << 40
	// MaxLatencyMs bounds an outcome's latency: one week in
	// milliseconds.
	MaxLatencyMs = 7 * 24 * 3600 * 1000.0
)

// tokensProblem says what is wrong with a token count, "" when nothing.
func tokensProblem(n int64) string {
	switch {
	case n < 0:
		return fmt.Sprintf("negative token count %d", n)
	case n > MaxTokens:
		return fmt.Sprintf("%d above the limit of %d tokens", n, MaxTokens)
	}
	return ""
}

// latencyProblem says what is wrong with a latency, "" when nothing.
func latencyProblem(ms float64) string {
	switch {
	case !(ms >= 0) || math.IsInf(ms, 0):
		return fmt.Sprintf("%v is not a finite value ≥ 0", ms)
	case ms > MaxLatencyMs:
		return fmt.Sprintf("%v above the limit of %v ms (one week)", ms, MaxLatencyMs)
	}
	return ""
}

// Tokens returns InputTokens + OutputTokens (exact: each is at most
// MaxTokens in records the readers return).
func (o *OutcomeRecord) Tokens() int64 { return o.InputTokens + o.OutputTokens }

// ReadStats counts what a reader saw.
type ReadStats struct {
	Lines           int `json:"lines"`
	Spans           int `json:"spans"`
	Decisions       int `json:"decisions"`
	FailedDecisions int `json:"failed_decisions"` // decision spans with error status
	Outcomes        int `json:"outcomes"`
	OtherSpans      int `json:"other_spans"`
	// DuplicateSpans counts decision and outcome spans dropped by
	// ReadTraceFiles because a span with the same (trace id, span id) was
	// read before (a file given twice, a line written twice).
	DuplicateSpans int `json:"duplicate_spans"`
}

func (s *ReadStats) add(o ReadStats) {
	s.Lines += o.Lines
	s.Spans += o.Spans
	s.Decisions += o.Decisions
	s.FailedDecisions += o.FailedDecisions
	s.Outcomes += o.Outcomes
	s.OtherSpans += o.OtherSpans
	s.DuplicateSpans += o.DuplicateSpans
}

// ReadTraces streams an OTLP JSON Lines file, calling onDecision for each
// decision span and onOutcome for each outcome span (either may be nil).
// Other spans are counted and skipped. A decision or outcome span whose
// (trace id, span id) was already read is dropped and counted in
// ReadStats.DuplicateSpans; one without a trace or span id (absent or all
// zero) is an error. The first malformed line or record stops the read
// with an error naming name and the line; an error returned by a callback
// stops it too. Records passed to callbacks are freshly allocated and may
// be kept. Cost O(file size) time, O(spans) memory for the duplicate set.
func ReadTraces(r io.Reader, name string, onDecision func(*DecisionRecord) error, onOutcome func(*OutcomeRecord) error) (ReadStats, error) {
	return readTraces(r, name, spanSet{}, onDecision, onOutcome)
}

// spanKey is a span's identity: trace id then span id.
type spanKey [16 + 8]byte

// spanSet holds the identities of the spans read so far.
type spanSet map[spanKey]struct{}

// firstSeen checks the span's ids and reports whether it is new.
func (s spanSet) firstSeen(sp *tracepb.Span, src string) (bool, error) {
	bad := func(what string) error {
		return fmt.Errorf("%w: %s: span %s: %s: missing or all zero (a span needs both ids to be told from a duplicate)",
			ErrBadRecord, src, hex.EncodeToString(sp.SpanId), what)
	}
	if len(sp.TraceId) != 16 || allZero(sp.TraceId) {
		return false, bad("trace id")
	}
	if len(sp.SpanId) != 8 || allZero(sp.SpanId) {
		return false, bad("span id")
	}
	var k spanKey
	copy(k[:16], sp.TraceId)
	copy(k[16:], sp.SpanId)
	if _, dup := s[k]; dup {
		return false, nil
	}
	s[k] = struct{}{}
	return true, nil
}

func allZero(b []byte) bool {
	for _, c := range b {
		if c != 0 {
			return false
		}
	}
	return true
}

func readTraces(r io.Reader, name string, seen spanSet, onDecision func(*DecisionRecord) error, onOutcome func(*OutcomeRecord) error) (ReadStats, error) {
	var st ReadStats
	sc := otlpfile.NewScanner(r, name, 0)
	for sc.Scan() {
		st.Lines++
		src := name + ":" + strconv.Itoa(sc.Line())
		for _, rs := range sc.TracesData().ResourceSpans {
			for _, ss := range rs.ScopeSpans {
				for _, sp := range ss.Spans {
					st.Spans++
					if sp.Name != SpanDecide && sp.Name != SpanOutcome {
						st.OtherSpans++
						continue
					}
					fresh, err := seen.firstSeen(sp, src)
					if err != nil {
						return st, err
					}
					if !fresh {
						st.DuplicateSpans++
						continue
					}
					switch sp.Name {
					case SpanDecide:
						if sp.Status.GetCode() == tracepb.Status_STATUS_CODE_ERROR {
							st.FailedDecisions++
							continue
						}
						d, err := decisionFromSpan(sp, src)
						if err != nil {
							return st, err
						}
						st.Decisions++
						if onDecision != nil {
							if err := onDecision(d); err != nil {
								return st, err
							}
						}
					case SpanOutcome:
						o, err := outcomeFromSpan(sp, src)
						if err != nil {
							return st, err
						}
						st.Outcomes++
						if onOutcome != nil {
							if err := onOutcome(o); err != nil {
								return st, err
							}
						}
					}
				}
			}
		}
	}
	return st, sc.Err()
}

// Log is the content of a set of trace files.
type Log struct {
	Decisions []DecisionRecord
	Outcomes  []OutcomeRecord
	Stats     ReadStats
}

// ReadTraceFiles reads every path into one Log (decisions in file order).
// A span whose (trace id, span id) was read before, in the same or an
// earlier file, is dropped and counted in Stats.DuplicateSpans: a file
// given twice, overlapping copies or a batch written twice count once.
func ReadTraceFiles(paths ...string) (*Log, error) {
	lg := &Log{}
	seen := spanSet{}
	for _, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			return nil, fmt.Errorf("otelx: %w", err)
		}
		st, err := readTraces(bufio.NewReaderSize(f, 1<<20), p, seen,
			func(d *DecisionRecord) error { lg.Decisions = append(lg.Decisions, *d); return nil },
			func(o *OutcomeRecord) error { lg.Outcomes = append(lg.Outcomes, *o); return nil })
		f.Close()
		lg.Stats.add(st)
		if err != nil {
			return nil, err
		}
	}
	return lg, nil
}

// attrReader decodes typed attributes and remembers the first error.
type attrReader struct {
	src, span string
	m         map[string]*commonpb.AnyValue
	err       error
}

func newAttrReader(sp *tracepb.Span, src string) *attrReader {
	a := &attrReader{src: src, span: hex.EncodeToString(sp.SpanId), m: make(map[string]*commonpb.AnyValue, len(sp.Attributes))}
	for _, kv := range sp.Attributes {
		if _, dup := a.m[kv.Key]; dup {
			// Attribute keys are unique in the OpenTelemetry data model,
			// so no SDK writes this; keeping either value would be a guess.
			a.fail(kv.Key, "given twice in one span")
		}
		a.m[kv.Key] = kv.Value
	}
	return a
}

func (a *attrReader) fail(key, format string, args ...any) {
	if a.err == nil {
		a.err = fmt.Errorf("%w: %s: span %s: attribute %s: %s", ErrBadRecord, a.src, a.span, key, fmt.Sprintf(format, args...))
	}
}

func typeName(v *commonpb.AnyValue) string {
	switch v.GetValue().(type) {
	case *commonpb.AnyValue_StringValue:
		return "string"
	case *commonpb.AnyValue_BoolValue:
		return "bool"
	case *commonpb.AnyValue_IntValue:
		return "int"
	case *commonpb.AnyValue_DoubleValue:
		return "double"
	case *commonpb.AnyValue_ArrayValue:
		return "array"
	case *commonpb.AnyValue_KvlistValue:
		return "kvlist"
	case *commonpb.AnyValue_BytesValue:
		return "bytes"
	}
	return "empty"
}

func (a *attrReader) has(key string) bool { _, ok := a.m[key]; return ok }

func (a *attrReader) str(key string, required bool) string {
	v, ok := a.m[key]
	if !ok {
		if required {
			a.fail(key, "missing")
		}
		return ""
	}
	if s, ok := v.GetValue().(*commonpb.AnyValue_StringValue); ok {
		return s.StringValue
	}
	a.fail(key, "want string, got %s", typeName(v))
	return ""
}

// float accepts double or int values; def is returned when absent.
func (a *attrReader) float(key string, def float64, required bool) float64 {
	v, ok := a.m[key]
	if !ok {
		if required {
			a.fail(key, "missing")
		}
		return def
	}
	switch x := v.GetValue().(type) {
	case *commonpb.AnyValue_DoubleValue:
		return x.DoubleValue
	case *commonpb.AnyValue_IntValue:
		return float64(x.IntValue)
	}
	a.fail(key, "want double, got %s", typeName(v))
	return def
}

// finite is float for a figure tune and ab compute with: NaN and ±Inf are
// errors (an infinite gain would pick the same mode under every threshold).
func (a *attrReader) finite(key string, def float64) float64 {
	f := a.float(key, def, false)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		a.fail(key, "%v is not finite", f)
		return def
	}
	return f
}

func (a *attrReader) int(key string) int64 {
	v, ok := a.m[key]
	if !ok {
		return 0
	}
	if x, ok := v.GetValue().(*commonpb.AnyValue_IntValue); ok {
		return x.IntValue
	}
	a.fail(key, "want int, got %s", typeName(v))
	return 0
}

func (a *attrReader) uint(key string) uint64 {
	n := a.int(key)
	if n < 0 {
		a.fail(key, "negative value %d", n)
		return 0
	}
	return uint64(n)
}

// tokens reads a token count: an int in [0, MaxTokens], 0 when absent.
func (a *attrReader) tokens(key string) int64 {
	n := a.int(key)
	if msg := tokensProblem(n); msg != "" {
		a.fail(key, "%s", msg)
		return 0
	}
	return n
}

func (a *attrReader) bool(key string) bool {
	v, ok := a.m[key]
	if !ok {
		return false
	}
	if x, ok := v.GetValue().(*commonpb.AnyValue_BoolValue); ok {
		return x.BoolValue
	}
	a.fail(key, "want bool, got %s", typeName(v))
	return false
}

func (a *attrReader) strings(key string) []string {
	v, ok := a.m[key]
	if !ok {
		return nil
	}
	arr, ok := v.GetValue().(*commonpb.AnyValue_ArrayValue)
	if !ok {
		a.fail(key, "want string array, got %s", typeName(v))
		return nil
	}
	out := make([]string, 0, len(arr.ArrayValue.GetValues()))
	for i, e := range arr.ArrayValue.GetValues() {
		s, ok := e.GetValue().(*commonpb.AnyValue_StringValue)
		if !ok {
			a.fail(key, "element %d: want string, got %s", i, typeName(e))
			return nil
		}
		out = append(out, s.StringValue)
	}
	return out
}

func (a *attrReader) ratio() float64 {
	r := a.float(KeySamplingRatio, 1, false)
	if !(r > 0 && r <= 1) {
		a.fail(KeySamplingRatio, "ratio %v not in (0,1]", r)
		return 1
	}
	return r
}

func spanTimes(sp *tracepb.Span) (time.Time, time.Duration) {
	start := time.Unix(0, int64(sp.StartTimeUnixNano)).UTC()
	var d time.Duration
	if sp.EndTimeUnixNano >= sp.StartTimeUnixNano {
		d = time.Duration(sp.EndTimeUnixNano - sp.StartTimeUnixNano)
	}
	return start, d
}

func decisionFromSpan(sp *tracepb.Span, src string) (*DecisionRecord, error) {
	a := newAttrReader(sp, src)
	d := &DecisionRecord{
		Source:  src,
		TraceID: hex.EncodeToString(sp.TraceId),
		SpanID:  hex.EncodeToString(sp.SpanId),
	}
	d.Start, d.Duration = spanTimes(sp)
	d.Key = a.str(KeyQueryKey, false)
	d.From = a.str(KeyQueryFrom, false)
	d.Value = a.str(KeyQueryValue, false)
	d.To = a.str(KeyQueryTo, false)
	d.Mode = a.str(KeyRouteMode, true)
	if a.err == nil && d.Mode != "direct" && d.Mode != "chain" {
		a.fail(KeyRouteMode, "unknown mode %q (want direct or chain)", d.Mode)
	}
	d.Gain = a.finite(KeyRouteGain, 0)
	d.Score = a.finite(KeyRouteScore, d.Gain)
	d.Reason = a.str(KeyRouteReason, false)
	d.Truncated = a.bool(KeyRouteTruncated)
	d.Explored = a.bool(KeyRouteExplored)
	d.Cached = a.bool(KeyRouteCached)
	d.Propensity = a.float(KeyRoutePropensity, math.NaN(), false)
	if a.has(KeyRoutePropensity) && !(d.Propensity >= 0 && d.Propensity <= 1) {
		a.fail(KeyRoutePropensity, "%v not in [0,1]", d.Propensity)
	}
	d.DirectErr = a.finite(KeyDirectErr, 0)
	d.DirectSupport = a.uint(KeyDirectSupport)
	// Compact spans carry the chain error only in chain mode; the hop
	// count is what marks a chain as available.
	if a.has(KeyChainErr) || a.has(KeyChainHops) {
		d.HasChain = true
		d.ChainErr = a.finite(KeyChainErr, 0)
		d.ChainHops = int(a.int(KeyChainHops))
		d.Bridges = a.strings(KeyChainBridges)
		d.ChainParallel = a.bool(KeyChainParallel)
		d.ChainMidpoint = a.bool(KeyChainMidpoint)
		if d.ChainHops < 0 {
			a.fail(KeyChainHops, "negative hop count %d", d.ChainHops)
		}
	}
	d.Arm = a.str(KeyABArm, false)
	d.Generation = a.str(KeyIndexGeneration, false)
	d.SamplingRatio = a.ratio()
	// The expected error of the chosen estimate, as router.Decision.Err.
	switch {
	case d.Mode == "chain" && d.HasChain:
		d.Err = d.ChainErr
	case d.Mode == "direct":
		d.Err = d.DirectErr
	}
	if a.err != nil {
		return nil, a.err
	}
	return d, nil
}

func outcomeFromSpan(sp *tracepb.Span, src string) (*OutcomeRecord, error) {
	a := newAttrReader(sp, src)
	o := &OutcomeRecord{Source: src}
	o.Time, _ = spanTimes(sp)
	o.Key = a.str(KeyQueryKey, true)
	o.Score = a.float(KeyOutcomeScore, 0, true)
	if a.err == nil && !(o.Score >= 0 && o.Score <= 1) {
		a.fail(KeyOutcomeScore, "%v not in [0,1]", o.Score)
	}
	o.InputTokens = a.tokens(KeyOutcomeInputTokens)
	o.OutputTokens = a.tokens(KeyOutcomeOutputTokens)
	o.LatencyMs = a.float(KeyOutcomeLatencyMs, 0, false)
	if msg := latencyProblem(o.LatencyMs); msg != "" && a.err == nil {
		a.fail(KeyOutcomeLatencyMs, "%s", msg)
	}
	o.Mode = a.str(KeyRouteMode, false)
	o.Arm = a.str(KeyABArm, false)
	o.SamplingRatio = a.ratio()
	if a.err != nil {
		return nil, a.err
	}
	return o, nil
}

// ReadOutcomes reads a plain outcomes JSONL file, one object per line:
//
//	{"unit":"unit-17","score":1,"input_tokens":812,"output_tokens":95,"latency_ms":640}
//
// unit and score are required (score in [0,1]); tokens are whole numbers in
// [0, MaxTokens] and latency_ms is in [0, one week], all optional. Fields
// are spelt exactly and given once: an unknown field (usually a typo), one
// differing from a known one only in case, or a repeated one is an error,
// since encoding/json would match case-insensitively and keep the last.
// Blank lines are skipped. Errors name the file, line and field and wrap
// ErrBadRecord.
func ReadOutcomes(r io.Reader, name string) ([]OutcomeRecord, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64<<10), 16<<20)
	var out []OutcomeRecord
	line := 0
	for sc.Scan() {
		line++
		b := bytes.TrimSpace(sc.Bytes())
		if len(b) == 0 {
			continue
		}
		src := name + ":" + strconv.Itoa(line)
		bad := func(field, format string, args ...any) error {
			return fmt.Errorf("%w: %s: field %s: %s", ErrBadRecord, src, field, fmt.Sprintf(format, args...))
		}
		p, fe := parsePlainOutcome(b)
		if fe != nil {
			if fe.field == "" {
				return nil, fmt.Errorf("%w: %s: %s", ErrBadRecord, src, fe.msg)
			}
			return nil, bad(fe.field, "%s", fe.msg)
		}
		switch {
		case p.Key == nil || *p.Key == "":
			return nil, bad("unit", "missing or empty")
		case p.Score == nil:
			return nil, bad("score", "missing")
		case !(*p.Score >= 0 && *p.Score <= 1):
			return nil, bad("score", "%v not in [0,1]", *p.Score)
		case p.InputTokens != nil && tokensProblem(*p.InputTokens) != "":
			return nil, bad("input_tokens", "%s", tokensProblem(*p.InputTokens))
		case p.OutputTokens != nil && tokensProblem(*p.OutputTokens) != "":
			return nil, bad("output_tokens", "%s", tokensProblem(*p.OutputTokens))
		case p.LatencyMs != nil && latencyProblem(*p.LatencyMs) != "":
			return nil, bad("latency_ms", "%s", latencyProblem(*p.LatencyMs))
		}
		o := OutcomeRecord{Source: src, Key: *p.Key, Score: *p.Score, SamplingRatio: 1}
		if p.InputTokens != nil {
			o.InputTokens = *p.InputTokens
		}
		if p.OutputTokens != nil {
			o.OutputTokens = *p.OutputTokens
		}
		if p.LatencyMs != nil {
			o.LatencyMs = *p.LatencyMs
		}
		out = append(out, o)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%w: %s:%d: %v", ErrBadRecord, name, line+1, err)
	}
	return out, nil
}

// ReadOutcomeFile opens path and calls ReadOutcomes.
func ReadOutcomeFile(path string) ([]OutcomeRecord, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("otelx: %w", err)
	}
	defer f.Close()
	return ReadOutcomes(f, path)
}

// Joined pairs a decision with its outcome.
type Joined struct {
	Decision *DecisionRecord
	Outcome  *OutcomeRecord
}

// JoinStats reports how the join went; nothing is dropped silently.
type JoinStats struct {
	Joined                  int `json:"joined"`
	DecisionsWithoutKey     int `json:"decisions_without_key"`
	DecisionsWithoutOutcome int `json:"decisions_without_outcome"`
	OutcomesWithoutDecision int `json:"outcomes_without_decision"`
}

// Join pairs decisions and outcomes by unit key. Within one key,
// decisions are taken in start-time order (ties: input order) and outcomes
// in input order, and the k-th outcome goes with the k-th decision. The
// result follows the order of decisions. O((n+m) log n).
func Join(decisions []DecisionRecord, outcomes []OutcomeRecord) ([]Joined, JoinStats) {
	var st JoinStats
	byKey := map[string][]int{}
	for i := range decisions {
		k := decisions[i].Key
		if k == "" {
			st.DecisionsWithoutKey++
			continue
		}
		byKey[k] = append(byKey[k], i)
	}
	for _, ids := range byKey {
		slices.SortStableFunc(ids, func(a, b int) int { return decisions[a].Start.Compare(decisions[b].Start) })
	}
	match := make([]int, len(decisions))
	for i := range match {
		match[i] = -1
	}
	next := map[string]int{}
	for j := range outcomes {
		k := outcomes[j].Key
		ids := byKey[k]
		n := next[k]
		if n >= len(ids) {
			st.OutcomesWithoutDecision++
			continue
		}
		match[ids[n]] = j
		next[k] = n + 1
	}
	out := make([]Joined, 0, len(outcomes))
	for i, j := range match {
		if j < 0 {
			if decisions[i].Key != "" {
				st.DecisionsWithoutOutcome++
			}
			continue
		}
		out = append(out, Joined{Decision: &decisions[i], Outcome: &outcomes[j]})
		st.Joined++
	}
	return out, st
}
