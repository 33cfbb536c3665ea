package telemetry

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// fullDisk is a file that takes limit bytes, then fails the rest of a write with ENOSPC
// after writing what fits, as write(2) does on a full disk.
type fullDisk struct {
	buf       bytes.Buffer
	limit     int
	truncated int64
	noTrunc   bool
}

func (f *fullDisk) Write(p []byte) (int, error) {
	room := f.limit - f.buf.Len()
	if room >= len(p) {
		return f.buf.Write(p)
	}
	f.buf.Write(p[:max(room, 0)])
	return max(room, 0), syscall.ENOSPC
}

func (f *fullDisk) Truncate(n int64) error {
	if f.noTrunc {
		return errors.New("cannot")
	}
	f.truncated = n
	f.buf.Truncate(int(n))
	return nil
}

// TestCaptureCutBack: on a full disk the capture ends with its last whole record, and
// the error says so with the count.
func TestCaptureCutBack(t *testing.T) {
	for _, limit := range []int{10, 100, 1000, 70000, 150000} {
		t.Run(fmt.Sprint(limit), func(t *testing.T) {
			disk := &fullDisk{limit: limit}
			cw, err := NewCaptureWriter(disk, time.Unix(0, 0), "source=/dev/ttyACM0")
			if err != nil {
				t.Fatal(err)
			}
			var werr error
			for i := 0; i < 5000 && werr == nil; i++ {
				werr = cw.Write(time.Duration(i)*time.Millisecond, FromBoard, []byte(fmt.Sprintf("t=%d sp=512 pv=%d u=+", i, 500+i%7)))
			}
			if werr == nil {
				werr = cw.Flush()
			}
			var cut *CaptureCutError
			if !errors.As(werr, &cut) || !errors.Is(werr, syscall.ENOSPC) {
				t.Fatalf("error %v, want a *CaptureCutError wrapping ENOSPC", werr)
			}
			got := disk.buf.Bytes()
			if len(got) > 0 && got[len(got)-1] != '\n' {
				t.Errorf("the capture ends inside a record: %q", got[max(0, len(got)-40):])
			}
			if int64(len(got)) != cut.Bytes || int64(bytes.Count(got, []byte{'\n'})) != cut.Records {
				t.Errorf("capture %d bytes, %d records; the error says %d bytes, %d records", len(got), bytes.Count(got, []byte{'\n'}), cut.Bytes, cut.Records)
			}
			if !strings.Contains(werr.Error(), "cut back to its last whole record") {
				t.Errorf("message %q does not say the capture was cut back", werr)
			}
			// Later calls keep failing with the same error and write nothing.
			if err := cw.Write(time.Second, FromBoard, []byte("sp=1 pv=1")); err != werr {
				t.Errorf("write after the failure: %v", err)
			}
			if int64(disk.buf.Len()) != cut.Bytes {
				t.Error("a write after the failure reached the file")
			}
		})
	}
	t.Run("cannot truncate", func(t *testing.T) {
		disk := &fullDisk{limit: 20, noTrunc: true}
		cw, _ := NewCaptureWriter(disk, time.Unix(0, 0))
		err := cw.Flush()
		if err == nil || !strings.Contains(err.Error(), "could not be cut off") {
			t.Errorf("error %v, want one that says the partial record stays", err)
		}
	})
}

// TestCaptureCutBackFile: the same on a real file, whose Truncate cuts the partial record.
func TestCaptureCutBackFile(t *testing.T) {
	path := filepath.Join(t.TempDir(), "run.cap")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	w := &partialFile{File: f, limit: 200}
	cw, _ := NewCaptureWriter(w, time.Unix(0, 0))
	for i := 0; i < 50; i++ {
		cw.Write(time.Duration(i)*time.Millisecond, FromBoard, []byte("sp=512 pv=510 u=+"))
	}
	if err := cw.Flush(); err == nil {
		t.Fatal("no error from a full disk")
	}
	b, _ := os.ReadFile(path)
	if len(b) == 0 || len(b) > 200 || b[len(b)-1] != '\n' {
		t.Errorf("file of %d bytes ending %q; want whole records within 200 bytes", len(b), b[max(0, len(b)-20):])
	}
}

// partialFile is an *os.File whose disk fills after limit bytes.
type partialFile struct {
	*os.File
	limit, n int
}

func (p *partialFile) Write(b []byte) (int, error) {
	room := p.limit - p.n
	if room >= len(b) {
		n, err := p.File.Write(b)
		p.n += n
		return n, err
	}
	n, _ := p.File.Write(b[:room])
	p.n += n
	return n, syscall.ENOSPC
}
