package wire

import (
	"errors"
	"fmt"
	"strings"

	"github.com/caploop/caploop/telemetry"
)

// ErrNoPortChosen is returned (wrapped) by ChoosePort when no port can be chosen without
// the user: none at all, no USB device, or several USB devices.
var ErrNoPortChosen = errors.New("no port chosen")

// ChoosePort applies the rules for picking the board's port when the user named none:
// the only USB serial device is used; several USB devices are offered (returned in
// offer, for the caller to ask which one on a terminal; the error lists them for a
// caller that cannot ask); built-in ports (no USB: /dev/ttyS0 and the like) are never
// chosen nor offered, as a board almost always hangs on USB, but the error names them so
// that one can be given by hand. The error wraps ErrNoPortChosen.
func ChoosePort(ports []PortInfo) (path string, offer []PortInfo, err error) {
	var usb, other []PortInfo
	for _, p := range ports {
		if p.USB {
			usb = append(usb, p)
		} else {
			other = append(other, p)
		}
	}
	var b strings.Builder
	switch {
	case len(usb) == 1:
		return usb[0].Path, nil, nil
	case len(usb) > 1:
		fmt.Fprintf(&b, "%d USB serial devices; name one:", len(usb))
		for _, p := range usb {
			b.WriteString("\n  " + DescribePort(p))
		}
		return "", usb, fmt.Errorf("%w: %s", ErrNoPortChosen, b.String())
	case len(other) == 0:
		return "", nil, fmt.Errorf("%w: no serial port found; plug the board in, or name its port", ErrNoPortChosen)
	}
	b.WriteString("no USB serial device found; plug the board in, or name its port. Built-in ports here (rarely a board):")
	for _, p := range other {
		b.WriteString("\n  " + DescribePort(p))
	}
	return "", nil, fmt.Errorf("%w: %s", ErrNoPortChosen, b.String())
}

// DescribePort is one line about a port: path, USB VID:PID, serial number and product,
// with the path and the device's own strings sanitised.
func DescribePort(p PortInfo) string {
	var b strings.Builder
	b.WriteString(telemetry.SanitizeN([]byte(p.Path), 200))
	if id := p.VIDPID(); id != "" {
		fmt.Fprintf(&b, "  %s", telemetry.SanitizeN([]byte(id), 20))
	}
	if p.Serial != "" {
		fmt.Fprintf(&b, "  serial %s", telemetry.SanitizeN([]byte(p.Serial), 40))
	}
	if p.Product != "" {
		fmt.Fprintf(&b, "  %s", telemetry.SanitizeN([]byte(p.Product), 40))
	}
	return b.String()
}
