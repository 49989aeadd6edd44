package scorer_test

import (
	"testing"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/scorer"
)

type labels [][]string

func (l labels) NumEntities() int                          { return len(l) }
func (l labels) Values(id graphidx.EntityID) []string      { return l[id] }
func (l labelsWithFlag) NumEntities() int                  { return 1 }
func (l labelsWithFlag) Values(graphidx.EntityID) []string { return []string{"a", "b"} }
func (l labelsWithFlag) PresenceOnly() bool                { return bool(l) }

type labelsWithFlag bool

func TestPresenceOnlyAndSelect(t *testing.T) {
	t.Parallel()
	p := graphidx.PresentValue
	tests := []struct {
		name string
		l    scorer.Labels
		want bool
	}{
		{"empty index", labels{}, false},
		{"all present", labels{{p}, {p}, {p}}, true},
		{"one valued entity last", labels{{p}, {p}, {"off", "on"}}, false},
		{"present beside another label", labels{{p}, {"absent", p}}, false},
		{"single non-present label", labels{{p}, {"on"}}, false},
		{"entity without labels", labels{{p}, {}}, false},
		{"index's own flag wins", labelsWithFlag(true), true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			if got := scorer.PresenceOnly(tc.l); got != tc.want {
				t.Fatalf("PresenceOnly = %v, want %v", got, tc.want)
			}
			m, err := scorer.Select(tc.l)
			if err != nil {
				t.Fatal(err)
			}
			want := "bayes"
			if tc.want {
				want = "support"
			}
			if m.Name() != want {
				t.Fatalf("Select chose %q, want %q", m.Name(), want)
			}
		})
	}
	if _, err := scorer.Select(labels{{p}}, scorer.WithSignalZ(2)); err == nil {
		t.Fatal("Select passed a Bayes-only option to the support model without an error")
	}
}
