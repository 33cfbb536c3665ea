package analysis

import (
	"bytes"
	"encoding/json"
	"reflect"
	"strings"
)

// Every nullable figure of the summary's JSON carries a <name>_reason when it is null
// (CONVENTIONS.md). The figures whose reason is set where they are worked out have a
// field of their own; for the others the reason follows from the figure they derive
// from (the same figure in other units, the limit cycle's twins) or from what the
// record as a whole lacks, and MarshalJSON adds it here, after the record's own keys.

// reasonFrom names, for a figure without a reason field of its own, the figure whose
// reason explains it too.
var reasonFrom = map[string]string{
	"pattern_onsets":             "pattern_period_s",
	"pattern_period_samples":     "pattern_period_s",
	"ripple_node_pp_counts":      "ripple_node_pp_v",
	"limit_cycle_drive_s":        "limit_cycle_period_s",
	"limit_cycle_period_samples": "limit_cycle_period_s",
	"ripple_freq_hz":             "limit_cycle_period_s",
}

const (
	reasonNoSteady = "no steady part: the setpoint was not reached"
	reasonNoVolts  = "needs vref and adc_bits"
)

// MarshalJSON writes the segment with a reason beside each null figure.
func (s Segment) MarshalJSON() ([]byte, error) {
	type plain Segment
	return withReasons(plain(s), func(key string) string {
		switch {
		case key == "deadband_counts":
			return "no deadband in force: a two-state loop, or the meta lines did not say"
		case key == "level_v" || key == "shortfall_v":
			if !s.Unreachable {
				return "the setpoint is reachable"
			}
		case key == "hold_droop_v_per_s":
			if !s.Rests {
				return "the loop cycles (it does not rest): see limit_cycle_period_s"
			}
		case key == "ripple_signal_pp_v" && s.SteadySamples > 0:
			return "fewer than 8 limit cycles in the steady part"
		case s.SteadySamples == 0 && key != "setpoint_v":
			return reasonNoSteady
		}
		if strings.HasSuffix(key, "_v") && s.SetpointV == nil {
			return reasonNoVolts
		}
		return ""
	})
}

// MarshalJSON writes the step with a reason beside each null figure.
func (st StepFigures) MarshalJSON() ([]byte, error) {
	type plain StepFigures
	return withReasons(plain(st), func(key string) string {
		switch {
		case strings.HasSuffix(key, "_v") && st.ToV == nil:
			return reasonNoVolts
		case key == "rise_s" || key == "slew_v_per_s":
			return "the level did not pass from 10 % to 90 % of the step within the segment"
		case key == "overshoot_v":
			return "no reading went past the new setpoint"
		}
		return ""
	})
}

// withReasons marshals v (a struct) and gives every null figure without a reason one:
// its own reason field when it has one, else a <key>_reason key appended. Intervals
// (keys with _ci) are not figures and get none.
func withReasons(v any, reason func(key string) string) ([]byte, error) {
	rv := reflect.ValueOf(&v).Elem().Elem()
	cp := reflect.New(rv.Type()).Elem()
	cp.Set(rv)
	t := cp.Type()
	keys := map[string]int{}
	for i := 0; i < t.NumField(); i++ {
		if k := jsonKey(t.Field(i)); k != "" {
			keys[k] = i
		}
	}
	str := func(key string) (reflect.Value, bool) {
		i, ok := keys[key]
		if !ok || cp.Field(i).Kind() != reflect.String {
			return reflect.Value{}, false
		}
		return cp.Field(i), true
	}
	var extra [][2]string
	for i := 0; i < t.NumField(); i++ {
		key, f := jsonKey(t.Field(i)), cp.Field(i)
		if key == "" || f.Kind() != reflect.Pointer || !f.IsNil() || strings.Contains(key, "_ci") {
			continue
		}
		own, has := str(key + "_reason")
		if has && own.String() != "" {
			continue
		}
		why := ""
		if src, ok := reasonFrom[key]; ok {
			if r, ok := str(src + "_reason"); ok {
				why = r.String()
			}
		}
		if why == "" {
			why = reason(key)
		}
		if why == "" {
			why = "not available"
		}
		if has {
			own.SetString(why)
		} else {
			extra = append(extra, [2]string{key + "_reason", why})
		}
	}
	js, err := json.Marshal(cp.Interface())
	if err != nil || len(extra) == 0 {
		return js, err
	}
	var b bytes.Buffer
	b.Write(js[:len(js)-1])
	for _, e := range extra {
		k, _ := json.Marshal(e[0])
		w, _ := json.Marshal(e[1])
		b.WriteByte(',')
		b.Write(k)
		b.WriteByte(':')
		b.Write(w)
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// jsonKey is the JSON key of a struct field ("" when it has none or is left out).
func jsonKey(f reflect.StructField) string {
	tag := f.Tag.Get("json")
	if tag == "-" || !f.IsExported() {
		return ""
	}
	name, _, _ := strings.Cut(tag, ",")
	if name == "" {
		name = f.Name
	}
	return name
}
