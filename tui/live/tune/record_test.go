//go:build unix

package tune

import (
	"context"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/advice"
	"github.com/caploop/caploop/telemetry/wire/firmware"
)

func TestParseRange(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in     string
		lo, hi float64
		bad    bool
	}{
		{"0.5V..3V", 0.5, 3, false},
		{"500mV..3V", 0.5, 3, false},
		{" 1 .. 2.5 ", 1, 2.5, false},
		{"3V..0.5V", 0, 0, true},
		{"1V-3V", 0, 0, true},
		{"-1V..3V", 0, 0, true},
		{"1A..3V", 0, 0, true},
	} {
		r, err := ParseRange(c.in)
		if c.bad != (err != nil) || (!c.bad && (r.Lo != c.lo || r.Hi != c.hi)) {
			t.Errorf("ParseRange(%q) = %v, %v", c.in, r, err)
		}
	}
}

// TestHeaderCompiles includes the header a run writes in a C file and checks, with the
// host C compiler, that the constants are what the run found: the deadband, the period
// and the setpoint scale (2^bits codes over vref: 2500 mV on a 10-bit, 5 V ADC is 512).
func TestHeaderCompiles(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("compiles C with cc; skipped with -short")
	}
	cc, err := firmware.Compiler()
	if errors.Is(err, firmware.ErrNoCompiler) {
		if os.Getenv("CI") == "true" {
			t.Fatal(err)
		}
		t.Skip(err)
	}
	db := 9
	sup, r := 5.0, 47e3
	res := &Result{
		Board:  BoardInfo{VrefV: 5, ADCBits: 10, PeriodS: 1e-3, SupplyV: &sup, ROhm: &r},
		Advice: &advice.Advice{DeadbandCounts: &db},
		Plant:  &PlantInfo{},
	}
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, HeaderFile), []byte(Header(res, time.Date(2026, 12, 2, 0, 0, 0, 0, time.UTC))), 0o644); err != nil {
		t.Fatal(err)
	}
	src := `#include "caploop_tune.h"
_Static_assert(CAPLOOP_DEADBAND_COUNTS == 9u, "deadband");
_Static_assert(CAPLOOP_PERIOD_US == 1000u, "period");
_Static_assert(CAPLOOP_SP_COUNTS(2500) == 512u, "scale");
int main(void) { return (int)(CAPLOOP_SP_COUNTS_PER_V * 0.0f); }
`
	if err := os.WriteFile(filepath.Join(dir, "use.c"), []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	out, err := exec.CommandContext(ctx, cc, "-std=c11", "-Wall", "-Werror", "-c", "-o", filepath.Join(dir, "use.o"), filepath.Join(dir, "use.c")).CombinedOutput()
	if err != nil {
		t.Fatalf("%v\n%s\n%s", err, out, Header(res, time.Now()))
	}
	h := Header(res, time.Now())
	if !strings.Contains(h, "declared parts: supply 5 V, R 47 kohm") {
		t.Errorf("header comment:\n%s", h)
	}
	for i := 0; i < len(h); i++ {
		if h[i] >= 0x80 {
			t.Fatalf("header byte %d is not ASCII:\n%s", i, h)
		}
	}
}
