package main

import "testing"

// TestCoresNext: busy goes to every processor at once; quiet goes back to one only after
// quietTicks quiet periods in a row; anything between keeps what is in use.
func TestCoresNext(t *testing.T) {
	t.Parallel()
	if cur, q := coresNext(1, 8, 0.9, 0); cur != 8 || q != 0 {
		t.Errorf("busy on one: %d, %d; want 8, 0", cur, q)
	}
	cur, q := 8, 0
	for i := 1; i < quietTicks; i++ {
		if cur, q = coresNext(cur, 8, 0.05, q); cur != 8 || q != i {
			t.Fatalf("quiet period %d: %d processors, %d quiet; want 8, %d", i, cur, q, i)
		}
	}
	if cur, q = coresNext(cur, 8, 0.05, q); cur != 1 || q != 0 {
		t.Errorf("after %d quiet periods: %d, %d; want 1, 0", quietTicks, cur, q)
	}
	if cur, q := coresNext(8, 8, 0.3, 5); cur != 8 || q != 0 {
		t.Errorf("between the thresholds: %d, %d; want 8 and the quiet count reset", cur, q)
	}
	if cur, q := coresNext(1, 8, 0.05, 0); cur != 1 || q != 0 {
		t.Errorf("quiet on one: %d, %d; want 1, 0", cur, q)
	}
}
