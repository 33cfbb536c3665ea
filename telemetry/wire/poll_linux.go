//go:build linux

package wire

import (
	"errors"
	"io"
	"os"
	"reflect"
	"time"

	"go.bug.st/serial"
	"golang.org/x/sys/unix"
)

// errHungUp is the read error of a port that hung up (an unplug, or the far end of a
// pseudo-terminal closed): the read returned no bytes and no error.
var errHungUp = errors.New("the port hung up")

// polledPort is an open serial port whose reads and writes go through the Go runtime's
// poller, on a non-blocking duplicate of the port's descriptor, instead of the serial
// library's Read, which waits in a select system call. A goroutine parked in the poller
// costs nothing while it waits; a thread blocked in a system call keeps the runtime's
// monitor waking every few tens of microseconds to see whether it should take the
// thread's processor back (thousands of wake-ups a second for a board that sends a line
// every millisecond). Close closes the duplicate (a pending Read or Write returns at
// once) and then the library's port.
type polledPort struct {
	serial.Port
	f *os.File
}

// polled returns p reading and writing through the poller, or p itself when its
// descriptor cannot be found (another version of the serial library) or polled.
func polled(p serial.Port) serial.Port {
	fd, ok := portFD(p)
	if !ok {
		return p
	}
	d, err := unix.Dup(fd)
	if err != nil {
		return p
	}
	unix.CloseOnExec(d)
	if err := unix.SetNonblock(d, true); err != nil {
		unix.Close(d)
		return p
	}
	f := os.NewFile(uintptr(d), "serial port")
	// A file the poller took accepts deadlines; one it did not would block in read(2)
	// where Close cannot reach it.
	if err := f.SetReadDeadline(time.Time{}); err != nil {
		f.Close()
		unix.SetNonblock(fd, false)
		return p
	}
	return &polledPort{Port: p, f: f}
}

// portFD finds the descriptor inside the serial library's port (its unexported field
// handle) and checks that it is a terminal.
func portFD(p serial.Port) (int, bool) {
	v := reflect.ValueOf(p)
	if v.Kind() != reflect.Pointer || v.IsNil() || v.Elem().Kind() != reflect.Struct {
		return 0, false
	}
	h := v.Elem().FieldByName("handle")
	if !h.IsValid() || !h.CanInt() {
		return 0, false
	}
	fd := int(h.Int())
	if fd < 0 {
		return 0, false
	}
	if _, err := unix.IoctlGetTermios(fd, unix.TCGETS); err != nil {
		return 0, false
	}
	return fd, true
}

func (q *polledPort) Read(b []byte) (int, error) {
	n, err := q.f.Read(b)
	if err == io.EOF {
		err = errHungUp
	}
	return n, err
}

func (q *polledPort) Write(b []byte) (int, error) { return q.f.Write(b) }

func (q *polledPort) Close() error {
	q.f.Close()
	return q.Port.Close()
}
