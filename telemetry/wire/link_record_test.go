package wire

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestLinkRecordPathNeverOpened: a Link whose port never opens leaves no capture file.
func TestLinkRecordPathNeverOpened(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "bench.cap")
	l := Dial(SerialConfig{Path: filepath.Join(dir, "ttyNONE")}, LinkOptions{RecordPath: path, Poll: 10 * time.Millisecond})
	time.Sleep(50 * time.Millisecond)
	if _, err := os.Stat(path); err != nil {
		t.Fatalf("the capture is not there while the Link runs: %v", err)
	}
	l.Close()
	if _, err := os.Stat(path); !os.IsNotExist(err) {
		t.Errorf("capture left behind after a session that never opened its port: %v", err)
	}
}

// TestLinkRecordPathRefusesLink: the capture path may not be a symbolic link or a FIFO;
// the target is left as it was.
func TestLinkRecordPathRefusesLink(t *testing.T) {
	dir := t.TempDir()
	victim := filepath.Join(dir, "victim")
	if err := os.WriteFile(victim, []byte("keep"), 0o600); err != nil {
		t.Fatal(err)
	}
	link := filepath.Join(dir, "bench.cap")
	if err := os.Symlink(victim, link); err != nil {
		t.Fatal(err)
	}
	l := Dial(SerialConfig{Path: filepath.Join(dir, "ttyNONE")}, LinkOptions{RecordPath: link})
	for range l.Batches() {
	}
	err := l.Err()
	l.Close()
	if err == nil || !strings.Contains(err.Error(), "refusing to write the capture") || !strings.Contains(err.Error(), "symbolic link") {
		t.Errorf("Err() = %v, want a refusal naming the symbolic link", err)
	}
	if b, _ := os.ReadFile(victim); string(b) != "keep" {
		t.Errorf("the link's target changed: %q", b)
	}
	if fi, err := os.Lstat(link); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Errorf("the link was replaced or removed: %v", err)
	}
}

// TestSerialErrorSanitised: a port name with escapes is shown as escaped text.
func TestSerialErrorSanitised(t *testing.T) {
	e := &SerialError{Path: "/dev/tty\x1b]0;pwned\x07\u202e", Op: "open", Kind: ErrPortNotFound}
	got := e.Error()
	if strings.ContainsAny(got, "\x1b\x07\u202e") || !strings.Contains(got, `/dev/tty\x1b]0;pwned\x07\u{202e} not found`) {
		t.Errorf("Error() = %q", got)
	}
}
