package router

import "testing"

// TestConfigGeneration: 1 after New, one more per successful Reconfigure,
// unchanged by a rejected one.
func TestConfigGeneration(t *testing.T) {
	t.Parallel()
	r, err := New(greenhouse(1))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if g := r.ConfigGeneration(); g != 1 {
		t.Fatalf("after New: %d, want 1", g)
	}
	if err := r.Reconfigure(WithGainThreshold(0.5)); err != nil {
		t.Fatal(err)
	}
	if err := r.Reconfigure(WithCacheSize(7)); err == nil {
		t.Fatal("changing the cache size accepted")
	}
	if g := r.ConfigGeneration(); g != 2 {
		t.Fatalf("after one Reconfigure and one rejected: %d, want 2", g)
	}
}
