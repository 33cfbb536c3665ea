package wire

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestChoosePort(t *testing.T) {
	board := PortInfo{Path: "/dev/ttyACM0", VID: "1209", PID: "0001", Serial: "A1", Product: "bench\x1b[2J", USB: true}
	adapter := PortInfo{Path: "/dev/ttyUSB0", VID: "1209", PID: "0002", USB: true}
	builtin := PortInfo{Path: "/dev/ttyS0"}
	tests := []struct {
		name     string
		ports    []PortInfo
		want     string
		offer    int
		errParts []string
		errNot   []string
	}{
		{"one usb among others", []PortInfo{builtin, board}, "/dev/ttyACM0", 0, nil, nil},
		{"two usb", []PortInfo{board, adapter, builtin}, "", 2, []string{"2 USB serial devices", "/dev/ttyACM0", "/dev/ttyUSB0", "serial A1"}, []string{"ttyS0"}},
		// A built-in port is never offered nor chosen, only named for giving by hand.
		{"no usb", []PortInfo{builtin}, "", 0, []string{"no USB serial device found", "plug the board in", "/dev/ttyS0"}, nil},
		{"nothing", nil, "", 0, []string{"no serial port found"}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, offer, err := ChoosePort(tc.ports)
			if got != tc.want || len(offer) != tc.offer {
				t.Errorf("port = %q, offer %v; want %q and %d offered", got, offer, tc.want, tc.offer)
			}
			for _, p := range offer {
				if !p.USB {
					t.Errorf("offered a built-in port %s", p.Path)
				}
			}
			if tc.errParts == nil {
				if err != nil {
					t.Errorf("error %v, want none", err)
				}
				return
			}
			if !errors.Is(err, ErrNoPortChosen) {
				t.Fatalf("error %v, want ErrNoPortChosen", err)
			}
			for _, p := range tc.errParts {
				if !strings.Contains(err.Error(), p) {
					t.Errorf("error %q lacks %q", err, p)
				}
			}
			for _, p := range tc.errNot {
				if strings.Contains(err.Error(), p) {
					t.Errorf("error %q names %q", err, p)
				}
			}
			if strings.Contains(err.Error(), "\x1b") {
				t.Errorf("error %q carries a raw escape byte", err)
			}
		})
	}
}

func TestCheckPort(t *testing.T) {
	dir := t.TempDir()
	plain := filepath.Join(dir, "bench.txt")
	if err := os.WriteFile(plain, []byte("x"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		path string
		kind error
		says string
	}{
		{"/dev/ttyNOPE", ErrPortNotFound, "not found: check the cable"},
		{filepath.Join(dir, "missing"), ErrPortNotFound, "not found"},
		{plain, ErrNotSerial, "is not a serial port"},
	} {
		err := CheckPort(tc.path)
		if !errors.Is(err, tc.kind) || !strings.Contains(err.Error(), tc.says) {
			t.Errorf("CheckPort(%s) = %v, want %v saying %q", tc.path, err, tc.kind, tc.says)
		}
	}
	p, err := OpenPTY()
	if err != nil {
		t.Skipf("no pseudo-terminal here: %v", err)
	}
	defer p.Close()
	if err := CheckPort(p.Path()); err != nil {
		t.Errorf("CheckPort(pty %s) = %v, want nil", p.Path(), err)
	}
}
