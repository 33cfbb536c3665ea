package main

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry/wire"
)

// TestWritePorts checks the table and the JSON, with device strings that try to reach the
// terminal raw (escape sequences, control bytes, invalid UTF-8).
func TestWritePorts(t *testing.T) {
	hostile := wire.PortInfo{Path: "/dev/ttyACM0", VID: "1209", PID: "0001", USB: true,
		Serial: "A1\x1b[2J", Product: "bench\x07 ref\xff"}
	plain := wire.PortInfo{Path: "/dev/ttyS0"}
	tests := []struct {
		name    string
		ports   []wire.PortInfo
		want    []string
		notWant []string
	}{
		{"none", nil, []string{"no serial ports found"}, nil},
		{"two", []wire.PortInfo{hostile, plain},
			[]string{"PORT", "VID:PID", "/dev/ttyACM0", "1209:0001", "/dev/ttyS0 "},
			[]string{"\x1b", "\x07", "\xff"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := writePorts(&b, tc.ports); err != nil {
				t.Fatal(err)
			}
			out := b.String()
			for _, w := range tc.want {
				if !strings.Contains(out, w) {
					t.Errorf("output lacks %q:\n%s", w, out)
				}
			}
			for _, w := range tc.notWant {
				if strings.Contains(out, w) {
					t.Errorf("output holds raw %q:\n%q", w, out)
				}
			}
		})
	}
}

func TestWritePortsJSON(t *testing.T) {
	tests := []struct {
		name  string
		ports []wire.PortInfo
		want  int
	}{
		{"none is an empty array", nil, 0},
		{"one", []wire.PortInfo{{Path: "/dev/ttyUSB0", VID: "1209", PID: "0002", USB: true}}, 1},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var b bytes.Buffer
			if err := writePortsJSON(&b, tc.ports); err != nil {
				t.Fatal(err)
			}
			var got []wire.PortInfo
			if err := json.Unmarshal(b.Bytes(), &got); err != nil {
				t.Fatalf("bad JSON %q: %v", b.String(), err)
			}
			if got == nil || len(got) != tc.want {
				t.Errorf("got %v from %q, want %d ports", got, b.String(), tc.want)
			}
		})
	}
}
