package wire

import (
	"os"
	"sort"
	"testing"
)

// TestListPorts lists the machine's real ports. What it finds depends on the machine, so
// it checks the shape of the answer: no error, sorted paths that exist, USB details only
// on USB ports, VID and PID as four hex digits.
func TestListPorts(t *testing.T) {
	ports, err := ListPorts()
	if err != nil {
		t.Fatalf("ListPorts: %v", err)
	}
	if !sort.SliceIsSorted(ports, func(i, j int) bool { return ports[i].Path < ports[j].Path }) {
		t.Errorf("ports not sorted by path: %v", ports)
	}
	for _, p := range ports {
		if _, err := os.Stat(p.Path); err != nil {
			t.Errorf("listed port %s: %v", p.Path, err)
		}
		if !p.USB && (p.VID != "" || p.PID != "" || p.VIDPID() != "") {
			t.Errorf("%s: USB details on a non-USB port: %+v", p.Path, p)
		}
		if p.USB {
			for _, id := range []string{p.VID, p.PID} {
				if len(id) != 4 {
					t.Errorf("%s: USB id %q, want four hex digits", p.Path, id)
				}
			}
		}
	}
	t.Logf("%d ports: %+v", len(ports), ports)
}

func TestPortInfoVIDPID(t *testing.T) {
	tests := []struct {
		name string
		p    PortInfo
		want string
	}{
		{"usb", PortInfo{Path: "/dev/ttyACM0", VID: "2e8a", PID: "000a", USB: true}, "2e8a:000a"},
		{"not usb", PortInfo{Path: "/dev/ttyS0"}, ""},
		{"usb without ids", PortInfo{Path: "/dev/ttyUSB0", USB: true}, ""},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.p.VIDPID(); got != tc.want {
				t.Errorf("got %q, want %q", got, tc.want)
			}
		})
	}
}
