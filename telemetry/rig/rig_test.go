package rig

import (
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"
)

func TestNames(t *testing.T) {
	boards := []Board{
		{Port: "/dev/ttyACM0", Serial: "E66138935F1B"},
		{Port: "/dev/ttyACM1", Serial: "E66138935F1B"}, // clone firmware: same serial
		{Port: "/dev/ttyUSB0"},
		{Port: "/tmp/x/ttyUSB0"},
		{Port: "/dev/ttyACM3", Serial: "../../etc/pw\x1b[2J"},
		{Port: "/dev/ttyACM4", Serial: "e66138935f1b"}, // differs only in case
	}
	got := Names(boards, ".cap")
	want := []string{"E66138935F1B.cap", "E66138935F1B-2.cap", "ttyUSB0.cap", "ttyUSB0-2.cap", "_.._etc_pw__2J.cap", "e66138935f1b-3.cap"}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("Names = %q, want %q", got, want)
	}
	for _, n := range got {
		if err := checkName(n); err != nil {
			t.Errorf("%s: %v", n, err)
		}
	}
}

func TestWriteRead(t *testing.T) {
	dir := t.TempDir()
	in := New([]Board{{Capture: "a.cap", Port: "/dev/ttyACM0", Serial: "A\x07B"}, {Capture: "b.cap", Port: "/dev/ttyACM1"}}, time.Date(2026, 12, 2, 11, 30, 0, 0, time.UTC))
	if err := Write(dir, in); err != nil {
		t.Fatal(err)
	}
	out, err := Read(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(out.Boards) != 2 || out.Boards[1].Capture != "b.cap" || out.Created != "2026-12-02T11:30:00Z" {
		t.Errorf("read back %+v", out)
	}
	if strings.ContainsRune(out.Boards[0].Serial, 7) {
		t.Errorf("serial kept a control byte: %q", out.Boards[0].Serial)
	}
	if _, err := Read(t.TempDir()); err != ErrNoRigFile {
		t.Errorf("empty folder: %v, want ErrNoRigFile", err)
	}
	for _, bad := range []string{
		`{"format":"caploop-rig","version":1,"boards":[{"capture":"../x.cap"}]}`,
		`{"format":"caploop-rig","version":1,"boards":[{"capture":"a.cap"},{"capture":"a.cap"}]}`,
		`{"format":"caploop-rig","version":2,"boards":[{"capture":"a.cap"}]}`,
		`{"format":"other","version":1,"boards":[{"capture":"a.cap"}]}`,
		`{"format":"caploop-rig","version":1,"boards":[]}`,
		`not json`,
	} {
		d := t.TempDir()
		os.WriteFile(filepath.Join(d, FileName), []byte(bad), 0o644)
		if _, err := Read(d); err == nil {
			t.Errorf("Read accepted %s", bad)
		}
	}
}
