package analysis

import (
	"reflect"
	"testing"

	"github.com/caploop/caploop/telemetry"
)

// TestSummarizeCopiesEverySampleField guards the field-by-field copy in Summarize: a
// field added to telemetry.Sample must be added there too.
func TestSummarizeCopiesEverySampleField(t *testing.T) {
	copied := []string{"Line", "Index", "T", "N", "Host", "SP", "PV", "U", "Flags"}
	typ := reflect.TypeOf(telemetry.Sample{})
	var got []string
	for i := range typ.NumField() {
		got = append(got, typ.Field(i).Name)
	}
	if !reflect.DeepEqual(got, copied) {
		t.Errorf("telemetry.Sample fields = %v, Summarize copies %v: update the copy in summarize.go", got, copied)
	}
}
