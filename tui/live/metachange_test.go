package live

import (
	"reflect"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

func TestMetaChanges(t *testing.T) {
	old := telemetry.Meta{Period: 1e-3, Supply: 5, Mode: telemetry.TwoState,
		Set: telemetry.FieldPeriod | telemetry.FieldSupply | telemetry.FieldMode}
	// First reports (R) and repeats (supply) are no change; period and mode changed.
	m := telemetry.Meta{Period: 5e-4, Supply: 5, R: 10e3, Mode: telemetry.ThreeState,
		Set: telemetry.FieldPeriod | telemetry.FieldSupply | telemetry.FieldR | telemetry.FieldMode}
	got := metaChanges(old, m)
	want := []string{"period_us 1000→500", "mode " + telemetry.TwoState.String() + "→" + telemetry.ThreeState.String()}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("metaChanges = %q, want %q", got, want)
	}
	if got := metaChanges(old, old); len(got) != 0 {
		t.Errorf("a repeat of every value is a change: %q", got)
	}
}
