package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"

	"github.com/caploop/caploop/telemetry"
)

// writeOutput writes a derived file (a table, a report) to path with fn, or to stdout
// when path is "" or "-". See writeReplacing for a path.
func writeOutput(path string, stdout io.Writer, fn func(w io.Writer) error) error {
	if path == "" || path == "-" {
		bw := bufio.NewWriterSize(stdout, 64<<10)
		if err := fn(bw); err != nil {
			return err
		}
		return bw.Flush()
	}
	return writeReplacing(path, fn)
}

// checkTarget returns the permission bits of the regular file at path (0 and nil when
// there is none), or an error when path is something a derived file must not replace:
// a symbolic link, a device, a FIFO, a socket or a folder.
func checkTarget(path string) (fs.FileMode, error) {
	fi, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return 0, nil
	}
	if err != nil {
		return 0, err
	}
	m := fi.Mode()
	var what string
	switch {
	case m&fs.ModeSymlink != 0:
		what = "a symbolic link"
	case m&fs.ModeDevice != 0:
		what = "a device"
	case m&fs.ModeNamedPipe != 0:
		what = "a FIFO"
	case m&fs.ModeSocket != 0:
		what = "a socket"
	case m.IsDir():
		what = "a folder"
	case !m.IsRegular():
		what = "not a regular file"
	default:
		return m.Perm(), nil
	}
	return 0, fmt.Errorf("refusing to write %s: it is %s", telemetry.Sanitize([]byte(path)), what)
}

// writeReplacing writes the derived file path with fn, all or nothing: into a temporary
// file in the same folder, synced to disk, then renamed over path, so a reader never sees
// half a file and a failed run leaves the old one. An existing file is replaced and keeps
// its permission bits (a new one gets 0644). It refuses a path that is a symbolic link, a
// device, a FIFO, a socket or a folder. Captures (data) must not come through here
// without the caller's own check: they are overwritten only with --force.
func writeReplacing(path string, fn func(w io.Writer) error) (err error) {
	name := telemetry.Sanitize([]byte(path))
	perm, err := checkTarget(path)
	if err != nil {
		return err
	}
	if perm == 0 {
		perm = 0o644
	}
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriterSize(tmp, 64<<10)
	if err := fn(bw); err != nil {
		return err
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Chmod(perm); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Sync(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	// Once more just before the rename: the path may have changed while fn ran.
	if _, err := checkTarget(path); err != nil {
		return err
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write %s: %w", name, err)
	}
	syncDir(filepath.Dir(path))
	return nil
}

// syncDir makes a rename in dir durable where the file system allows it (best effort:
// some refuse to sync a folder).
func syncDir(dir string) {
	d, err := os.Open(dir)
	if err != nil {
		return
	}
	_ = d.Sync()
	d.Close()
}
