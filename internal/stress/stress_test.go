package stress

import "testing"

func TestOn(t *testing.T) {
	for _, c := range []struct {
		v    string
		want bool
	}{{"1", true}, {"", false}, {"0", false}, {"yes", false}} {
		t.Setenv(Var, c.v)
		if got := On(); got != c.want {
			t.Errorf("%s=%q: On() = %v, want %v", Var, c.v, got, c.want)
		}
	}
}
