package telemetry

import "testing"

// TestMetaAccepts reads the accepts key of an info answer: its comma-separated list
// (commas also separate meta words), a key after the list, a round trip through
// AppendMeta, and malformed lists rejected whole.
func TestMetaAccepts(t *testing.T) {
	var p Parser
	r := p.Parse([]byte("# accepts=sp,mode,deadband,period_us"))
	if r.Kind != RecMeta {
		t.Fatalf("kind %v, want meta (%v)", r.Kind, p.LastError())
	}
	m := r.Meta
	if m.Accepts != "sp,mode,deadband,period_us" || !m.Has(FieldAccepts) {
		t.Fatalf("Accepts %q set %b", m.Accepts, m.Set)
	}
	for _, k := range []string{"sp", "mode", "deadband", "period_us"} {
		if !m.AcceptsKey(k) {
			t.Errorf("AcceptsKey(%q) false", k)
		}
	}
	if m.AcceptsKey("period") || m.AcceptsKey("") {
		t.Error("AcceptsKey true for a key not listed")
	}
	if got := string(AppendMeta(nil, Meta{Accepts: m.Accepts, Set: FieldAccepts})); got != "# accepts=sp,mode,deadband,period_us" {
		t.Errorf("AppendMeta = %q", got)
	}

	var q Parser
	r = q.Parse([]byte("# accepts=sp,deadband deadband=4"))
	if r.Kind != RecMeta || r.Meta.Accepts != "sp,deadband" || r.Meta.Deadband != 4 {
		t.Fatalf("list then a key: kind %v meta %+v (%v)", r.Kind, r.Meta, q.LastError())
	}
	// A later accepts line replaces the list.
	r = q.Parse([]byte("# accepts=mode"))
	if r.Meta.Accepts != "mode" || r.Meta.AcceptsKey("sp") {
		t.Errorf("second accepts line: %q", r.Meta.Accepts)
	}

	for _, bad := range []string{"# accepts=sp,Mode", "# accepts=sp,m\x01", "# deadband=4 accepts=sp,a-b"} {
		var b Parser
		if r := b.Parse([]byte(bad)); r.Kind != RecRejected {
			t.Errorf("%q: kind %v, want rejected", bad, r.Kind)
		}
	}
	// Without accepts= a bare word is still an error, as before.
	var c Parser
	if r := c.Parse([]byte("# deadband=4 mode")); r.Kind != RecRejected {
		t.Errorf("bare word after a key: kind %v, want rejected", r.Kind)
	}
}
