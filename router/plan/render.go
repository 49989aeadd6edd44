package plan

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"strconv"
	"text/template"

	"github.com/hopwise/hopwise/router"
)

// ErrTemplate wraps every template error: a template that does not parse
// (from NewRenderer) or fails to execute (from Render and Execute).
var ErrTemplate = errors.New("plan: template")

// DefaultChainTemplate is the chain template NewRenderer uses unless
// WithChainTemplate replaces it: work through the bridges in order, then
// answer; for a parallel plan (Plan.Parallel) work out each bridge from
// what is known alone, then answer from both together.
const DefaultChainTemplate = `Work this out in steps before answering.
{{if .HasValue}}Known: {{.FromName}}: {{.Value}}.{{else}}Known: {{.FromName}} is involved.{{end}}
{{range $i, $s := .Steps}}Step {{inc $i}}: work out the state of {{$s.Name}}{{if $.Parallel}} from what is known alone{{end}}{{if $s.HasValue}} (the records lean to "{{$s.Value}}", {{percent $s.Prob}}){{end}}.
{{end}}Finally, from {{if .Parallel}}those states taken together{{else}}those steps{{end}}, say {{if .Answer.HasValue}}what {{.ToName}} is likely to be{{else}}how {{.ToName}} is affected{{end}}. Put the answer after the steps.
`

// DefaultDirectTemplate is the direct template NewRenderer uses unless
// WithDirectTemplate replaces it: answer without step-by-step working.
const DefaultDirectTemplate = `Answer directly{{if .HasValue}} (known: {{.FromName}}: {{.Value}}; asked: {{.ToName}}){{end}}. Skip step-by-step working: give the answer and at most one sentence of reason.
`

// Funcs are the functions a template may call beside text/template's
// built-ins:
//
//	inc     i+1 (number steps from 1 in a range)
//	percent a probability as a whole percentage, "73%" (NaN/Inf: "?")
//	fixed   a number with four significant digits, "0.01234"
func Funcs() template.FuncMap {
	return template.FuncMap{
		"inc": func(i int) int { return i + 1 },
		"percent": func(p float64) string {
			if p != p || p > 1e300 || p < -1e300 {
				return "?"
			}
			return strconv.FormatFloat(p*100, 'f', 0, 64) + "%"
		},
		"fixed": func(x float64) string { return strconv.FormatFloat(x, 'g', 4, 64) },
	}
}

// Renderer renders plans as prompt text through two text/templates.
type Renderer struct {
	chain, direct *template.Template
}

// RenderOption configures NewRenderer.
type RenderOption func(*renderConfig)

type renderConfig struct {
	chain, direct string
}

// WithChainTemplate replaces the chain template (text/template syntax over
// a Plan, with Funcs).
func WithChainTemplate(text string) RenderOption {
	return func(c *renderConfig) { c.chain = text }
}

// WithDirectTemplate replaces the direct template (text/template syntax
// over a Plan, with Funcs).
func WithDirectTemplate(text string) RenderOption {
	return func(c *renderConfig) { c.direct = text }
}

// NewRenderer parses the two templates (the defaults unless replaced) and
// renders each on sample plans of every shape a router produces (chains of
// one and three steps, direct plans, valued and presence-only, a fallback
// without an estimate). A template that does not parse, or fails on a
// sample, is an error wrapping ErrTemplate that names it ("chain" or
// "direct") and the sample's shape. A template can still fail in Render on
// a plan no sample has (say, one branching on an entity's name).
func NewRenderer(opts ...RenderOption) (*Renderer, error) {
	c := renderConfig{chain: DefaultChainTemplate, direct: DefaultDirectTemplate}
	for _, o := range opts {
		if o != nil {
			o(&c)
		}
	}
	chain, err := parse("chain", c.chain)
	if err != nil {
		return nil, err
	}
	direct, err := parse("direct", c.direct)
	if err != nil {
		return nil, err
	}
	r := &Renderer{chain: chain, direct: direct}
	var b bytes.Buffer
	for _, p := range samplePlans() {
		b.Reset()
		if err := r.render(&b, p); err != nil {
			return nil, fmt.Errorf("%w (on a sample %s)", err, sampleShape(p))
		}
	}
	return r, nil
}

// samplePlans are plans of every shape a router gives a template: chains
// of one and three steps and direct plans, valued and presence-only, and
// a fallback decision without an estimate. NewRenderer renders each, so a
// template that cannot render one of them (a misspelt field, an index past
// the steps, a function given the wrong type) fails once, at construction,
// instead of on every such plan.
func samplePlans() []Plan {
	step := func(e, name, v string, p float64) Step {
		return Step{Entity: e, Name: name, Value: v, Prob: p, HasValue: v != ""}
	}
	valued := Plan{Mode: router.ModeChain, From: "bed-2/moisture-probe", FromName: "bed 2 moisture probe", Value: "reads-dry", HasValue: true,
		To: "bed-3/leaf-wilt", ToName: "bed 3 leaf wilt",
		Steps:       []Step{step("bed-2/soil-moisture", "bed 2 soil moisture", "dry", 0.9)},
		Answer:      step("bed-3/leaf-wilt", "bed 3 leaf wilt", "wilted", 0.6),
		ErrorFigure: router.NewErrorFigure(router.MeasureSqErrorSum, 0.01), Support: 120, Reason: router.ReasonGainAbove}
	long := valued
	long.Steps = []Step{valued.Steps[0], step("pump-1", "pump 1", "idle", 0.7), step("bed-3/soil-moisture", "bed 3 soil moisture", "dry", 0.55)}
	long.Truncated = true
	presence := Plan{Mode: router.ModeChain, From: "vent-a", FromName: "vent a", To: "bed-3", ToName: "bed 3",
		Steps: []Step{step("pump-2", "pump 2", "", 0)}, Answer: step("bed-3", "bed 3", "", 0),
		ErrorFigure: router.NewErrorFigure(router.MeasureSupportProxy, 0.3), Support: 52, Reason: router.ReasonGainAbove}
	parallel := valued
	parallel.Parallel = true
	parallel.Steps = []Step{valued.Steps[0], step("pump-1", "pump 1", "idle", 0.7)}
	direct, directPresence := valued, presence
	direct.Mode, direct.Steps, direct.Reason = router.ModeDirect, nil, router.ReasonGainBelow
	directPresence.Mode, directPresence.Steps, directPresence.Reason = router.ModeDirect, nil, router.ReasonGainBelow
	fallback := direct
	fallback.Answer, fallback.Reason, fallback.Support = step("bed-3/leaf-wilt", "bed 3 leaf wilt", "", 0), router.ReasonUnknownEntityFallback, 0
	return []Plan{valued, long, parallel, presence, direct, directPresence, fallback}
}

// sampleShape describes a sample plan for an error message.
func sampleShape(p Plan) string {
	kind := "valued"
	if !p.HasValue {
		kind = "presence-only"
	}
	if Template(p) == "chain" {
		if p.Parallel {
			return fmt.Sprintf("%s parallel plan of %d steps", kind, len(p.Steps))
		}
		if len(p.Steps) == 1 {
			return kind + " chain of 1 step"
		}
		return fmt.Sprintf("%s chain of %d steps", kind, len(p.Steps))
	}
	if p.Reason == router.ReasonUnknownEntityFallback {
		return "fallback direct plan without an estimate"
	}
	return kind + " direct plan"
}

func parse(name, text string) (*template.Template, error) {
	t, err := template.New(name).Funcs(Funcs()).Option("missingkey=error").Parse(text)
	if err != nil {
		return nil, fmt.Errorf("%w: %s template: %v", ErrTemplate, name, err)
	}
	return t, nil
}

// Render returns the plan's prompt text: the chain template when the plan
// is a chain with at least one step, else the direct template. O(size of
// the output).
func (r *Renderer) Render(p Plan) (string, error) {
	var b bytes.Buffer
	if err := r.render(&b, p); err != nil {
		return "", err
	}
	return b.String(), nil
}

// Execute writes the plan's prompt text to w (see Render). The text is
// rendered in memory first, so w receives nothing when the template fails.
func (r *Renderer) Execute(w io.Writer, p Plan) error {
	var b bytes.Buffer
	if err := r.render(&b, p); err != nil {
		return err
	}
	_, err := w.Write(b.Bytes())
	return err
}

// Template returns the name of the template Render uses for p ("chain" or
// "direct").
func Template(p Plan) string {
	if p.Mode.String() == "chain" && len(p.Steps) > 0 {
		return "chain"
	}
	return "direct"
}

func (r *Renderer) render(b *bytes.Buffer, p Plan) (err error) {
	if r == nil || r.chain == nil || r.direct == nil {
		return fmt.Errorf("%w: renderer not built by NewRenderer", ErrTemplate)
	}
	t := r.direct
	if Template(p) == "chain" {
		t = r.chain
	}
	// text/template recovers panics of called functions and methods into
	// errors; this guard keeps the no-panic promise for anything else.
	defer func() {
		if v := recover(); v != nil {
			err = fmt.Errorf("%w: %s template: %v", ErrTemplate, t.Name(), v)
		}
	}()
	if err := t.Execute(b, p); err != nil {
		return fmt.Errorf("%w: %v", ErrTemplate, err)
	}
	return nil
}
