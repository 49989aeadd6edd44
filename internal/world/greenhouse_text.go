package world

import (
	"bufio"
	"fmt"
	"io"
	"strings"
	"unicode"
	"unicode/utf8"
)

// LexiconLine is one line of a lexicon for graphidx.ParseLexicon: Surface
// names Entity and, when Value is not empty, states that value of it
// (three columns).
type LexiconLine struct {
	Surface, Entity, Value string
}

// greenhousePart is how the text of the greenhouse names one kind of
// variable: its display noun and the phrase that states a value ("is",
// "reads", or a subject of its own).
type greenhousePart struct {
	noun    string // "vent A" (after the scope: "zone 3 vent A")
	subject string // subject of the value phrase; "" means the display name
	verb    string // "is", "are" or "reads"
}

var greenhouseParts = map[string]greenhousePart{
	"air-temp":       {noun: "air temperature", subject: "air", verb: "is"},
	"thermometer":    {noun: "thermometer", verb: "reads"},
	"vent-a":         {noun: "vent A", verb: "is"},
	"vent-b":         {noun: "vent B", verb: "is"},
	"humidity":       {noun: "humidity", verb: "is"},
	"hygrometer":     {noun: "hygrometer", verb: "reads"},
	"heater":         {noun: "heater", verb: "is"},
	"soil-moisture":  {noun: "soil moisture", subject: "soil", verb: "is"},
	"moisture-probe": {noun: "moisture probe", verb: "reads"},
	"leaf-wilt":      {noun: "leaf wilt", subject: "leaves", verb: "are"},
	"yield":          {noun: "yield", verb: "is"},
}

// greenhouseScope splits a greenhouse name into its scope ("zone 3",
// "bed 11", "pump 2", "outside") and its part ("vent-a", "", "weather").
func greenhouseScope(name string) (scope, part string, err error) {
	head, part, _ := strings.Cut(name, "/")
	kind, num, ok := strings.Cut(head, "-")
	switch {
	case head == "outside" && part == "weather":
		return "outside", part, nil
	case ok && (kind == "zone" || kind == "bed") && part != "" && num != "":
		if _, known := greenhouseParts[part]; known {
			return kind + " " + num, part, nil
		}
	case ok && kind == "pump" && part == "" && num != "":
		return "pump " + num, "", nil
	}
	return "", "", fmt.Errorf("world: %q is not a greenhouse entity name", name)
}

// GreenhouseDisplayName is how the greenhouse's questions name an entity:
// "zone 3 vent A", "bed 11 moisture probe", "pump 2", "the weather
// outside". It is an error for a name Greenhouse does not generate.
func GreenhouseDisplayName(name string) (string, error) {
	scope, part, err := greenhouseScope(name)
	switch {
	case err != nil:
		return "", err
	case scope == "outside":
		return "the weather outside", nil
	case part == "":
		return scope, nil
	}
	return scope + " " + greenhouseParts[part].noun, nil
}

// GreenhouseValuePhrase is how the greenhouse's questions state a value:
// "zone 3 vent A is open", "bed 11 moisture probe reads wet", "bed 10
// leaves are wilted", "pump 2 is running", "the weather outside is sunny".
func GreenhouseValuePhrase(name, label string) (string, error) {
	scope, part, err := greenhouseScope(name)
	if err != nil {
		return "", err
	}
	if label == "" {
		return "", fmt.Errorf("world: empty value of %q", name)
	}
	words := strings.ReplaceAll(label, "-", " ")
	switch {
	case scope == "outside":
		return "the weather outside is " + words, nil
	case part == "":
		return scope + " is " + words, nil
	}
	p := greenhouseParts[part]
	subject := scope + " " + p.noun
	if p.subject != "" {
		subject = scope + " " + p.subject
	}
	if p.verb == "reads" {
		// "reads-wet" already carries the verb.
		return subject + " " + words, nil
	}
	return subject + " " + p.verb + " " + words, nil
}

// GreenhouseLexicon returns the lexicon of a greenhouse world: for each
// variable, in index order, its display name (two columns; listed first,
// so it is the entity's display name) and then one phrase per value
// (three columns). O(variables × values).
func GreenhouseLexicon(w *World) ([]LexiconLine, error) {
	var out []LexiconLine
	for v := range w.NumVars() {
		name := w.Name(v)
		disp, err := GreenhouseDisplayName(name)
		if err != nil {
			return nil, err
		}
		out = append(out, LexiconLine{Surface: disp, Entity: name})
		for _, l := range w.Labels(v) {
			ph, err := GreenhouseValuePhrase(name, l)
			if err != nil {
				return nil, err
			}
			out = append(out, LexiconLine{Surface: ph, Entity: name, Value: l})
		}
	}
	return out, nil
}

// WriteLexicon writes lines as lexicon TSV ("surface<TAB>entity" or
// "surface<TAB>entity<TAB>value"). A field holding a tab or a line break is
// an error.
func WriteLexicon(out io.Writer, lines []LexiconLine) error {
	bw := bufio.NewWriter(out)
	for i, l := range lines {
		for _, f := range []string{l.Surface, l.Entity, l.Value} {
			if strings.ContainsAny(f, "\t\r\n") {
				return fmt.Errorf("world: lexicon line %d: field %q holds a tab or line break", i+1, f)
			}
		}
		if l.Surface == "" || l.Entity == "" {
			return fmt.Errorf("world: lexicon line %d: empty surface or entity", i+1)
		}
		bw.WriteString(l.Surface)
		bw.WriteByte('\t')
		bw.WriteString(l.Entity)
		if l.Value != "" {
			bw.WriteByte('\t')
			bw.WriteString(l.Value)
		}
		bw.WriteByte('\n')
	}
	return bw.Flush()
}

// Observation is one stated fact of a question: entity = value.
type Observation struct{ Entity, Value string }

// GreenhouseQuestion writes a free-text question that states the facts in
// obs (by their value phrases) and asks about the entity to (by its
// display name), in one of a few wordings chosen by style. Linked against
// GreenhouseLexicon, it gives one valued mention per fact and one mention
// of to without a value.
func GreenhouseQuestion(obs []Observation, to string, style int) (string, error) {
	if len(obs) == 0 {
		return "", fmt.Errorf("world: a question needs at least one observation")
	}
	facts := make([]string, len(obs))
	for i, o := range obs {
		ph, err := GreenhouseValuePhrase(o.Entity, o.Value)
		if err != nil {
			return "", err
		}
		facts[i] = ph
	}
	target, err := GreenhouseDisplayName(to)
	if err != nil {
		return "", err
	}
	said := facts[0]
	if len(facts) > 1 {
		said = strings.Join(facts[:len(facts)-1], ", ") + " and " + facts[len(facts)-1]
	}
	var q string
	switch style % 3 {
	case 0:
		q = fmt.Sprintf("This morning %s. What should we expect for %s?", said, target)
	case 1:
		q = fmt.Sprintf("%s. Before the next watering round, how is %s likely to be?", capitalise(said), target)
	default:
		q = fmt.Sprintf("The night log says %s. Is %s worth a look?", said, target)
	}
	return q, nil
}

func capitalise(s string) string {
	r, n := utf8.DecodeRuneInString(s)
	return string(unicode.ToUpper(r)) + s[n:]
}
