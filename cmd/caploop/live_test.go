package main

import (
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry/wire"
)

func TestParseSpeed(t *testing.T) {
	tests := []struct {
		in   string
		want float64
		bad  bool
	}{{"1", 1, false}, {"2x", 2, false}, {"10", 10, false}, {"max", 0, false}, {"MAX", 0, false}, {"0", 0, true}, {"-2", 0, true}, {"fast", 0, true}}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			got, err := parseSpeed(tc.in)
			if (err != nil) != tc.bad || got != tc.want {
				t.Errorf("parseSpeed(%q) = %g, %v; want %g, error %v", tc.in, got, err, tc.want, tc.bad)
			}
		})
	}
}

func TestAskPort(t *testing.T) {
	list := []wire.PortInfo{
		{Path: "/dev/ttyACM0", VID: "1209", PID: "0001", Product: "bench\x1b[2J", USB: true},
		{Path: "/dev/ttyUSB0", VID: "1209", PID: "0002", USB: true},
	}
	tests := []struct {
		name, in, want string
		wantErr        bool
	}{
		{"second", "2\n", "/dev/ttyUSB0", false},
		{"retry after a bad answer", "x\n9\n1\n", "/dev/ttyACM0", false},
		{"gives up after three", "x\ny\nz\n2\n", "", true},
		{"end of input", "", "", true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var out strings.Builder
			got, err := askPort(list, strings.NewReader(tc.in), &out)
			if got != tc.want || (err != nil) != tc.wantErr {
				t.Errorf("askPort = %q, %v; want %q, error %v", got, err, tc.want, tc.wantErr)
			}
			if !strings.Contains(out.String(), "1) /dev/ttyACM0  1209:0001") || strings.Contains(out.String(), "\x1b") {
				t.Errorf("listing not as expected or not sanitised:\n%q", out.String())
			}
		})
	}
}
