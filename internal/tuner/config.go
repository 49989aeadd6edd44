package tuner

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"reflect"
	"slices"
	"strconv"
	"strings"

	"github.com/hopwise/hopwise/internal/atomicfile"
	"github.com/hopwise/hopwise/otelx"
	"github.com/hopwise/hopwise/router"
)

// current returns the configuration in production: o.Base, or the router
// defaults with the exploration rate and the A/B arms read off the logged
// decisions. The notes say what was read and what could not be.
func current(decisions []otelx.DecisionRecord, o Options) (router.Config, []string) {
	eps, epsNote := loggedExploration(decisions, o.Arm)
	var notes []string
	if epsNote != "" {
		notes = append(notes, epsNote)
	}
	if o.Base != nil {
		if eps >= 0 && math.Abs(eps-o.Base.Exploration) > 1e-9 {
			notes = append(notes, fmt.Sprintf("the logged decisions explored at ε = %v but the base config says exploration %v; the written config keeps the base's", eps, o.Base.Exploration))
		}
		return *o.Base, notes
	}
	c := router.DefaultConfig()
	if eps > 0 {
		c.Exploration = eps
		notes = append(notes, fmt.Sprintf("exploration ε = %v read off the logged propensities (no base config given)", eps))
	}
	if arms := loggedArms(decisions); arms != nil {
		withArms := c
		withArms.Arms = arms
		if err := withArms.Validate(); err != nil {
			notes = append(notes, fmt.Sprintf("the A/B arms of the logged decisions (%s) do not form a valid router config (%v); the written config has no arms: give the deployed config as base", armList(arms), err))
		} else {
			c = withArms
			notes = append(notes, fmt.Sprintf("A/B arms %s read off the logged decisions as unit shares rounded to 0.01 (no base config given): "+
				"give the deployed config as base to keep the exact weights, their order, the hash key and the exploration salt", armList(arms)))
		}
	}
	return c, notes
}

// loggedExploration returns the exploration rate ε of the routed policy's
// decisions: a routed decision's propensity is ε when exploration chose
// its mode and 1 − ε otherwise (ε ≤ 1/2). It returns −1 without any such
// decision (no exploration logged, or no propensities), and a note when
// the logs hold several rates (the most frequent is returned).
func loggedExploration(decisions []otelx.DecisionRecord, arm string) (float64, string) {
	count := map[float64]int{}
	for i := range decisions {
		d := &decisions[i]
		if (d.Arm != "" && d.Arm != arm) || !routedReasons[d.Reason] || !d.HasPropensity() || d.Propensity >= 1 || d.Propensity <= 0 {
			continue
		}
		e := min(d.Propensity, 1-d.Propensity)
		count[math.Round(e*1e12)/1e12]++
	}
	if len(count) == 0 {
		return -1, ""
	}
	rates := make([]float64, 0, len(count))
	for e := range count {
		rates = append(rates, e)
	}
	slices.SortFunc(rates, func(a, b float64) int { return count[b] - count[a] })
	if len(rates) > 1 {
		return rates[0], fmt.Sprintf("the logged decisions hold %d exploration rates (%v...); the most frequent, %v, is taken as the current one", len(rates), rates[:min(3, len(rates))], rates[0])
	}
	return rates[0], ""
}

// loggedArms returns the arms of the logged decisions weighted by their
// share of distinct unit keys (a decision without key counts as one
// unit), rounded to 0.01 and at least 0.01, heaviest first; decisions
// without an arm are left out. nil when no decision carries an arm.
func loggedArms(decisions []otelx.DecisionRecord) []router.ArmWeight {
	units := map[string]map[string]bool{}
	anon := map[string]int{}
	for i := range decisions {
		d := &decisions[i]
		if d.Arm == "" { // not in any arm: outside the allocation
			continue
		}
		if units[d.Arm] == nil {
			units[d.Arm] = map[string]bool{}
		}
		if d.Key == "" {
			anon[d.Arm]++
		} else {
			units[d.Arm][d.Key] = true
		}
	}
	if len(units) == 0 {
		return nil
	}
	total := 0
	for a, ks := range units {
		total += len(ks) + anon[a]
	}
	var out []router.ArmWeight
	for a, ks := range units {
		w := math.Max(0.01, math.Round(100*float64(len(ks)+anon[a])/float64(total))/100)
		out = append(out, router.ArmWeight{Arm: a, Weight: w})
	}
	// Heaviest arm first (ties by name): the order the arms are listed in
	// is part of the assignment, and is not in the logs.
	slices.SortFunc(out, func(a, b router.ArmWeight) int {
		if c := cmpFloat(b.Weight, a.Weight); c != 0 {
			return c
		}
		return strings.Compare(a.Arm, b.Arm)
	})
	return out
}

func armList(arms []router.ArmWeight) string {
	var b bytes.Buffer
	for i, a := range arms {
		if i > 0 {
			b.WriteString(", ")
		}
		fmt.Fprintf(&b, "%s=%v", a.Arm, a.Weight)
	}
	return b.String()
}

// alwaysWritten are the config fields written even at their default:
// the tuned pair and the exploration rate the next tune depends on.
var alwaysWritten = map[string]bool{"gain_threshold": true, "max_bridges": true, "exploration": true}

// EncodeConfig returns c as an indented JSON object holding τ, H, ε and
// every field that differs from router.DefaultConfig, in the field order
// of router.Config. A field at its default is left out, so the router's
// own default (which a refit may change) applies, and an unset value is
// never written as a zero that would mean something else. The result
// reads back through router.ParseConfig into c exactly.
func EncodeConfig(c router.Config) ([]byte, error) {
	if err := c.Validate(); err != nil {
		return nil, err
	}
	full, err := json.Marshal(c)
	if err != nil {
		return nil, err
	}
	defs, err := fieldsOf(router.DefaultConfig())
	if err != nil {
		return nil, err
	}
	dec := json.NewDecoder(bytes.NewReader(full))
	if _, err := dec.Token(); err != nil { // {
		return nil, err
	}
	var out bytes.Buffer
	out.WriteString("{")
	n := 0
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, err
		}
		key := tok.(string)
		var raw json.RawMessage
		if err := dec.Decode(&raw); err != nil {
			return nil, err
		}
		if !alwaysWritten[key] && bytes.Equal(raw, defs[key]) {
			continue
		}
		if n > 0 {
			out.WriteString(",")
		}
		n++
		var ind bytes.Buffer
		if err := json.Indent(&ind, raw, "  ", "  "); err != nil {
			return nil, err
		}
		fmt.Fprintf(&out, "\n  %s: %s", strconv.Quote(key), ind.Bytes())
	}
	out.WriteString("\n}\n")
	back, err := router.ParseConfig(bytes.NewReader(out.Bytes()), "encoded config")
	if err != nil {
		return nil, err
	}
	if !reflect.DeepEqual(back, c) {
		return nil, fmt.Errorf("tuner: the encoded config does not read back the same: %+v vs %+v", back, c)
	}
	return out.Bytes(), nil
}

// fieldsOf maps each JSON field of c to its encoding.
func fieldsOf(c router.Config) (map[string]json.RawMessage, error) {
	b, err := json.Marshal(c)
	if err != nil {
		return nil, err
	}
	m := map[string]json.RawMessage{}
	return m, json.Unmarshal(b, &m)
}

// WriteConfig writes EncodeConfig(c) to path through a temporary file in
// the same directory, fsync and rename: a reader sees the old file or
// the new one, never a part.
func WriteConfig(path string, c router.Config) error {
	b, err := EncodeConfig(c)
	if err != nil {
		return err
	}
	return atomicfile.Write(path, ".hopwise-config-*", func(w io.Writer) error {
		_, err := w.Write(b)
		return err
	})
}

// FormatTaus formats thresholds with the fewest significant digits (at
// least 4) that keep distinct values distinct, so rows of a τ grid whose
// values bunch up can be told apart.
func FormatTaus(taus []float64) []string {
	distinct := map[float64]bool{}
	for _, t := range taus {
		distinct[t] = true
	}
	out := make([]string, len(taus))
	for prec := 4; ; prec++ {
		seen := map[string]bool{}
		for i, t := range taus {
			out[i] = strconv.FormatFloat(t, 'g', prec, 64)
			seen[out[i]] = true
		}
		if len(seen) == len(distinct) || prec >= 17 {
			return out
		}
	}
}
