package main

import (
	"strings"
	"testing"

	"github.com/caploop/caploop/telemetry/wire"
)

func TestPickFrom(t *testing.T) {
	board := wire.PortInfo{Path: "/dev/ttyACM0", VID: "1209", PID: "0001", Serial: "A1", Product: "bench\x1b[2J", USB: true}
	adapter := wire.PortInfo{Path: "/dev/ttyUSB0", VID: "1209", PID: "0002", USB: true}
	builtin := wire.PortInfo{Path: "/dev/ttyS0"}
	tests := []struct {
		name     string
		ports    []wire.PortInfo
		want     string
		errParts []string
	}{
		{"one usb among others", []wire.PortInfo{builtin, board}, "/dev/ttyACM0", nil},
		{"two usb", []wire.PortInfo{board, adapter, builtin}, "", []string{"2 USB serial devices", "/dev/ttyACM0", "/dev/ttyUSB0", "serial A1", `bench\x1b[2J`}},
		{"no usb", []wire.PortInfo{builtin}, "", []string{"no USB serial device", "/dev/ttyS0"}},
		{"nothing", nil, "", []string{"no serial port found"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, err := pickFrom(tc.ports)
			if got != tc.want {
				t.Errorf("port = %q, want %q", got, tc.want)
			}
			if tc.errParts == nil {
				if err != nil {
					t.Errorf("error %v, want none", err)
				}
				return
			}
			if err == nil {
				t.Fatalf("no error, want one with %q", tc.errParts)
			}
			for _, p := range tc.errParts {
				if !strings.Contains(err.Error(), p) {
					t.Errorf("error %q lacks %q", err, p)
				}
			}
			if strings.Contains(err.Error(), "\x1b") {
				t.Errorf("error %q carries a raw escape byte", err)
			}
		})
	}
}

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
