package ope

import (
	"errors"
	"math"
	"testing"

	"github.com/hopwise/hopwise/internal/abstat"
)

// TestVersusReference: the paired difference to the reference policy has
// the difference of the point estimates, covers the true difference, is
// exactly 0 for the reference itself and excludes 0 for a policy that is
// truly much better; its interval is narrower than the two policies'
// own intervals put together (the paired replicates share their noise).
func TestVersusReference(t *testing.T) {
	t.Parallel()
	w := world{eps: 0.2, tau0: 0.02}
	samples := w.logs(3, 60000)
	grid := Grid{Taus: []float64{-1, 0.02, 1}, MaxHops: []int{3}}
	res, err := Sweep(samples, grid, WithBootstrap(300, 5), WithReference(1, 3))
	if err != nil {
		t.Fatal(err)
	}
	ref := res[2] // τ = 1: never chain
	refTrue, _ := truth(1, 3)
	for _, r := range res {
		v := r.Versus
		if v == nil || v.Tau != 1 || v.MaxHops != 3 {
			t.Fatalf("τ=%v: versus %+v", r.Tau, v)
		}
		if got, want := v.DR.Est, r.DR.Value.Est-ref.DR.Value.Est; math.Abs(got-want) > 1e-12 {
			t.Errorf("τ=%v: DR difference %v, want %v", r.Tau, got, want)
		}
		tr, _ := truth(r.Tau, r.MaxHops)
		for name, iv := range map[string]abstat.Interval{"IPS": v.IPS, "SNIPS": v.SNIPS, "DR": v.DR} {
			if !(iv.Lo-1e-12 <= tr-refTrue && tr-refTrue <= iv.Hi+1e-12) {
				t.Errorf("τ=%v %s difference %v misses the true %.4f", r.Tau, name, iv, tr-refTrue)
			}
		}
		if r.Tau == 1 && (v.DR.Est != 0 || v.DR.Lo != 0 || v.DR.Hi != 0) {
			t.Errorf("reference against itself: %v", v.DR)
		}
		if r.Tau == -1 {
			// chaining everything gains 3·E[score] − 0.02·E[hops] ≈ 0.09 on
			// the 80% of units with a chain: far from 0
			if !(v.DR.Lo > 0) {
				t.Errorf("a truly better policy: DR difference %v does not exclude 0", v.DR)
			}
			if paired, sep := v.DR.Hi-v.DR.Lo, (r.DR.Value.Hi-r.DR.Value.Lo)+(ref.DR.Value.Hi-ref.DR.Value.Lo); !(paired < sep) {
				t.Errorf("paired interval width %.4f not below the sum of the two widths %.4f", paired, sep)
			}
		}
	}
	if _, err := Sweep(samples, grid, WithReference(0.5, 3)); !errors.Is(err, ErrBadOption) {
		t.Errorf("reference outside the grid: %v", err)
	}
	noRef, err := Sweep(samples, grid, WithBootstrap(10, 5))
	if err != nil || noRef[0].Versus != nil {
		t.Errorf("without a reference: %+v %v", noRef[0].Versus, err)
	}
}
