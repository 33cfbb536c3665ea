// Package rig reads and writes caploop's rig file: the list of the captures of a test
// rig recorded into one folder, one capture per board.
//
// The rig file is rig.json in the folder, a JSON object of our own:
//
//	{
//	  "format": "caploop-rig",
//	  "version": 1,
//	  "created": "2026-12-02T11:30:00Z",
//	  "boards": [
//	    {"capture": "A1B2C3.cap", "port": "/dev/ttyACM0", "serial": "A1B2C3", "vid_pid": "2e8a:000a", "product": "bias board"},
//	    {"capture": "ttyACM1.cap", "port": "/dev/ttyACM1"}
//	  ]
//	}
//
// format and version identify the file (a reader refuses another format or a newer
// version); created is when the recording started (RFC 3339, UTC); boards lists the boards
// in the order they were given. capture is the capture's file name inside the folder (a
// plain name: no folder part, never "." or ".."); port is the path the board was read
// from; serial, vid_pid and product are what the USB device reported, absent when
// it reported nothing. Every string from a device is sanitised before it is written.
//
// A capture is named by the board's USB serial number, or by the port's base name when
// it has none, reduced to letters, digits, '-', '_' and '.', with "-2", "-3"... added when
// two boards would get the same name (Names does this).
package rig

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"github.com/caploop/caploop/telemetry"
)

// FileName is the rig file's name inside a rig folder.
const FileName = "rig.json"

// Format and Version identify the rig file.
const (
	Format  = "caploop-rig"
	Version = 1
)

// Board is one board of the rig.
type Board struct {
	Capture string `json:"capture"`
	Port    string `json:"port"`
	Serial  string `json:"serial,omitempty"`
	VIDPID  string `json:"vid_pid,omitempty"`
	Product string `json:"product,omitempty"`
}

// File is the rig file.
type File struct {
	Format  string  `json:"format"`
	Version int     `json:"version"`
	Created string  `json:"created"`
	Boards  []Board `json:"boards"`
}

// New returns a rig file for boards, created at t.
func New(boards []Board, t time.Time) File {
	return File{Format: Format, Version: Version, Created: t.UTC().Format(time.RFC3339), Boards: boards}
}

// Write writes f as dir/rig.json, through a temporary file renamed into place.
func Write(dir string, f File) error {
	for i := range f.Boards {
		b := &f.Boards[i]
		if err := checkName(b.Capture); err != nil {
			return fmt.Errorf("rig: board %d: %w", i+1, err)
		}
		b.Port = telemetry.SanitizeN([]byte(b.Port), 200)
		b.Serial = telemetry.SanitizeN([]byte(b.Serial), 80)
		b.Product = telemetry.SanitizeN([]byte(b.Product), 80)
		b.VIDPID = telemetry.SanitizeN([]byte(b.VIDPID), 20)
	}
	data, err := json.MarshalIndent(f, "", "  ")
	if err != nil {
		return fmt.Errorf("rig: %w", err)
	}
	data = append(data, '\n')
	tmp, err := os.CreateTemp(dir, "."+FileName+".*.tmp")
	if err != nil {
		return fmt.Errorf("rig: %w", err)
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return fmt.Errorf("rig: %w", err)
	}
	if err := tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return fmt.Errorf("rig: %w", err)
	}
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return fmt.Errorf("rig: %w", err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("rig: %w", err)
	}
	if err := os.Rename(tmp.Name(), filepath.Join(dir, FileName)); err != nil {
		return fmt.Errorf("rig: %w", err)
	}
	return nil
}

// ErrNoRigFile is returned by Read when the folder has no rig file.
var ErrNoRigFile = errors.New("rig: no " + FileName)

// Read reads dir/rig.json. It refuses another format, a newer version, no boards, and a
// capture name that is not a plain file name (so a rig file cannot point outside its
// folder).
func Read(dir string) (File, error) {
	var f File
	data, err := os.ReadFile(filepath.Join(dir, FileName))
	if errors.Is(err, os.ErrNotExist) {
		return f, ErrNoRigFile
	}
	if err != nil {
		return f, fmt.Errorf("rig: %w", err)
	}
	if err := json.Unmarshal(data, &f); err != nil {
		return f, fmt.Errorf("rig: %s: %w", FileName, err)
	}
	switch {
	case f.Format != Format:
		return f, fmt.Errorf("rig: %s: format %q, want %q", FileName, telemetry.SanitizeN([]byte(f.Format), 40), Format)
	case f.Version < 1 || f.Version > Version:
		return f, fmt.Errorf("rig: %s: version %d; this caploop reads version %d", FileName, f.Version, Version)
	case len(f.Boards) == 0:
		return f, fmt.Errorf("rig: %s lists no boards", FileName)
	}
	seen := map[string]bool{}
	for i, b := range f.Boards {
		if err := checkName(b.Capture); err != nil {
			return f, fmt.Errorf("rig: %s: board %d: %w", FileName, i+1, err)
		}
		if seen[b.Capture] {
			return f, fmt.Errorf("rig: %s: board %d: capture %q listed twice", FileName, i+1, b.Capture)
		}
		seen[b.Capture] = true
	}
	return f, nil
}

// checkName accepts a plain file name: no folder part, not "." or "..", no control bytes.
func checkName(n string) error {
	if n == "" || n == "." || n == ".." || strings.ContainsAny(n, `/\`) || telemetry.Sanitize([]byte(n)) != n {
		return fmt.Errorf("capture name %q is not a plain file name", telemetry.SanitizeN([]byte(n), 60))
	}
	return nil
}

// Names returns the capture file name of each board: its serial number when it has one,
// else the base name of its port, reduced to safe characters, with ext appended and
// "-2", "-3"... before ext when a name repeats.
func Names(boards []Board, ext string) []string {
	out := make([]string, len(boards))
	used := map[string]bool{}
	for i, b := range boards {
		base := safeName(b.Serial)
		if base == "" {
			base = safeName(filepath.Base(b.Port))
		}
		if base == "" {
			base = "board" + strconv.Itoa(i+1)
		}
		name := base + ext
		for k := 2; used[strings.ToLower(name)]; k++ {
			name = base + "-" + strconv.Itoa(k) + ext
		}
		used[strings.ToLower(name)] = true
		out[i] = name
	}
	return out
}

// safeName keeps letters, digits, '-', '_' and '.' (others become '_'), at most 64 of
// them, and never starts with '.'.
func safeName(s string) string {
	var b strings.Builder
	for _, r := range s {
		if b.Len() >= 64 {
			break
		}
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '-', r == '_', r == '.':
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
	}
	out := strings.TrimLeft(b.String(), ".")
	if strings.Trim(out, "_") == "" {
		return ""
	}
	return out
}
