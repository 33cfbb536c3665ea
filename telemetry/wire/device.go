package wire

import (
	"context"
	"io"
)

// Device is a board that Serve puts behind a pseudo-terminal: Run writes its output to w
// until ctx ends (in real time when realtime is set) and Send hands it one line the host
// wrote. When w also has Unplug and Replug methods, a device may call them to simulate
// the USB cable (the virtual board of analysis/loop/virtual does).
type Device interface {
	Run(ctx context.Context, w io.Writer, realtime bool) error
	Send(line string)
}

// ServeOptions configure Serve.
type ServeOptions struct {
	// Link is the stable device path: a symbolic link that always points at the current
	// pseudo-terminal, so a re-plugged board (a new pseudo-terminal) appears at the same
	// path. Empty means "tty" in a new temporary directory, removed when Serve returns.
	Link string
	// Ready, when set, is called once with the device path as soon as it can be opened.
	Ready func(path string)
	// WaitOpen holds the board in reset until a program first opens the device, as
	// boards that reset when the port opens do: the first reader sees the boot banner
	// and every line after it.
	WaitOpen bool
	// DropWhenFull drops the board's output that the reader does not take in time, as a
	// USB serial bridge without flow control does, instead of making the board wait for
	// the reader as a link with flow control does (the default).
	DropWhenFull bool
}
