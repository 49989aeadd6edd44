package corpus

import (
	"fmt"
	"hash/maphash"
	"strconv"

	"github.com/hopwise/hopwise/graphidx"
)

// formTracker enforces, across the lines of one JSONL reader, that no
// entity is both listed in "ents" (present) and given a value other than
// graphidx.PresentValue in "obs" (see JSONLReader): such an entity would get
// "present" as a spurious extra value.
//
// Entities are tracked by the 64-bit maphash of their name: one map entry
// (hash, form, first line) per distinct entity, O(distinct entities) memory
// of about 40 bytes each, and one look-up per observation. Reading costs
// about 1.6× the CPU of the unchecked reader (BenchmarkJSONLReaderFormCheck),
// a few percent of a build. Two names with equal hashes in different forms
// would be reported as mixed: with n entities the chance is about n²/2⁶⁵
// (3·10⁻⁶ at 10⁷ entities). The zero value is ready to use.
type formTracker struct {
	m       map[uint64]entityForm
	seed    maphash.Seed
	scratch []uint64 // hashes of the line's entities not yet recorded
	off     bool     // benchmark baseline only: check nothing
}

// entityForm is how an entity was observed so far (formPresent,
// formValued) and the line that first did so.
type entityForm struct {
	form uint8
	line int
}

const (
	formPresent uint8 = 1 // listed in "ents"
	formValued  uint8 = 2 // in "obs" with a value other than graphidx.PresentValue
)

// check rejects the line (number line, observations obs, "ents" form when
// presence) when it observes an entity in the other form than earlier
// lines did, and otherwise records its entities. A rejected line records
// nothing. One map look-up per observation.
func (t *formTracker) check(obs []graphidx.Observation, presence bool, line int) *graphidx.LineError {
	if t.off {
		return nil
	}
	if t.m == nil {
		t.m = make(map[uint64]entityForm)
		t.seed = maphash.MakeSeed()
	}
	f := formValued
	if presence {
		f = formPresent
	}
	t.scratch = t.scratch[:0]
	for i := range obs {
		o := &obs[i]
		if !presence && o.Value == graphidx.PresentValue {
			continue // "obs" with the value present fits either form
		}
		h := maphash.String(t.seed, o.Entity)
		prev, ok := t.m[h]
		if !ok {
			t.scratch = append(t.scratch, h)
			continue
		}
		if prev.form != f {
			field, how, was := "ents", "as present", "with values"
			if f == formValued {
				field, how, was = "obs."+o.Entity, "with value "+strconv.Quote(o.Value), `as present ("ents")`
			}
			return &graphidx.LineError{Field: field, Reason: graphidx.ReasonMixedForms, Detail: fmt.Sprintf(
				"%s is observed %s here but %s at line %d: one entity must not mix valued and presence-only lines",
				strconv.Quote(o.Entity), how, was, prev.line)}
		}
	}
	for _, h := range t.scratch {
		t.m[h] = entityForm{form: f, line: line}
	}
	return nil
}
