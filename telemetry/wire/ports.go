package wire

import (
	"fmt"
	"sort"
	"strings"

	"go.bug.st/serial/enumerator"
)

// PortInfo describes one serial port of this machine. VID, PID, Serial and Product are
// set for USB ports only (VID and PID as four lower-case hex digits, as USB writes them).
// Serial and Product come from the device itself: sanitise them before printing.
type PortInfo struct {
	Path    string `json:"path"`
	VID     string `json:"vid,omitempty"`
	PID     string `json:"pid,omitempty"`
	Serial  string `json:"serial,omitempty"`
	Product string `json:"product,omitempty"`
	USB     bool   `json:"usb"`
}

// VIDPID returns "vid:pid" for a USB port and "" otherwise.
func (p PortInfo) VIDPID() string {
	if !p.USB || (p.VID == "" && p.PID == "") {
		return ""
	}
	return p.VID + ":" + p.PID
}

// ListPorts lists the serial ports of this machine, sorted by path, with USB vendor and
// product IDs, serial number and product name where the system knows them. It does not
// open the ports. No ports is an empty list, not an error.
func ListPorts() ([]PortInfo, error) {
	list, err := enumerator.GetDetailedPortsList()
	if err != nil {
		return nil, fmt.Errorf("telemetry: list serial ports: %w", err)
	}
	ports := make([]PortInfo, 0, len(list))
	for _, d := range list {
		if d == nil {
			continue
		}
		ports = append(ports, PortInfo{
			Path:    d.Name,
			VID:     strings.ToLower(d.VID),
			PID:     strings.ToLower(d.PID),
			Serial:  d.SerialNumber,
			Product: d.Product,
			USB:     d.IsUSB,
		})
	}
	sort.Slice(ports, func(i, j int) bool { return ports[i].Path < ports[j].Path })
	return ports, nil
}
