//go:build linux

package wire

import (
	"errors"
	"io"
	"runtime"
	"strings"
	"testing"
	"time"
)

// TestPortIsPolled: on Linux a port opened for reading is read through the runtime's
// poller (a library update that moves the port's descriptor fails here, not silently
// back to a read that costs thousands of runtime wake-ups a second); Close ends a Read
// that waits, and the far end closing ends it with an error, not io.EOF (which readers
// take for the clean end of a file).
func TestPortIsPolled(t *testing.T) {
	p, err := OpenPTY()
	if err != nil {
		t.Fatalf("OpenPTY: %v", err)
	}
	defer p.Close()
	port, err := openPort(SerialConfig{Path: p.Path()})
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := port.(*polledPort); !ok {
		port.Close()
		t.Fatalf("openPort returned %T, want *polledPort", port)
	}
	// Bytes both ways.
	if _, err := p.Master().WriteString("a=1\n"); err != nil {
		t.Fatal(err)
	}
	buf := make([]byte, 64)
	n, err := port.Read(buf)
	if err != nil || string(buf[:n]) != "a=1\n" {
		t.Fatalf("read %q, %v; want %q", buf[:n], err, "a=1\n")
	}
	if _, err := port.Write([]byte("info\n")); err != nil {
		t.Fatal(err)
	}
	p.Master().SetReadDeadline(time.Now().Add(5 * time.Second))
	n, err = p.Master().Read(buf)
	if err != nil || !strings.HasPrefix(string(buf[:n]), "info") {
		t.Fatalf("master read %q, %v; want the command", buf[:n], err)
	}

	// A waiting Read parks in the poller: it holds no thread in a system call.
	done := make(chan error, 1)
	go func() {
		_, err := port.Read(buf)
		done <- err
	}()
	time.Sleep(50 * time.Millisecond)
	all := make([]byte, 1<<20)
	all = all[:runtime.Stack(all, true)]
	parked := false
	for _, g := range strings.Split(string(all), "\n\n") {
		if strings.Contains(g, "TestPortIsPolled.func1") {
			parked = strings.Contains(g, "runtime_pollWait")
		}
	}
	if !parked {
		t.Errorf("the waiting Read is not parked in the poller:\n%s", all)
	}
	if err := port.Close(); err != nil {
		t.Errorf("close: %v", err)
	}
	select {
	case err := <-done:
		if err == nil {
			t.Error("read after close returned no error")
		}
	case <-time.After(2 * time.Second):
		t.Fatal("Close did not end a waiting Read")
	}

	// The far end closing: an error that is not io.EOF.
	q, err := OpenPTY()
	if err != nil {
		t.Fatal(err)
	}
	port2, err := openPort(SerialConfig{Path: q.Path()})
	if err != nil {
		q.Close()
		t.Fatal(err)
	}
	defer port2.Close()
	go func() {
		_, err := port2.Read(buf)
		done <- err
	}()
	time.Sleep(50 * time.Millisecond)
	q.Close()
	select {
	case err := <-done:
		if err == nil || errors.Is(err, io.EOF) {
			t.Errorf("read after the far end closed: %v, want an error other than io.EOF", err)
		}
	case <-time.After(2 * time.Second):
		t.Fatal("the far end closing did not end a waiting Read")
	}
}
