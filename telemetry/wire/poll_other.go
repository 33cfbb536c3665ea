//go:build !linux

package wire

import "go.bug.st/serial"

// polled returns p: elsewhere than on Linux the serial library's own reads are used.
func polled(p serial.Port) serial.Port { return p }
