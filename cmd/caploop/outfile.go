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
		err := fn(bw)
		if err == nil {
			err = bw.Flush()
		}
		if err != nil {
			return fmt.Errorf("write to standard output: %w", telemetry.CleanPathError(err))
		}
		return nil
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
		return 0, telemetry.CleanPathError(err)
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
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
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
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
	}
	if err := tmp.Chmod(perm); err != nil {
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
	}
	if err := tmp.Sync(); err != nil {
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
	}
	// Once more just before the rename: the path may have changed while fn ran.
	if _, err := checkTarget(path); err != nil {
		return err
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write %s: %w", name, telemetry.CleanPathError(err))
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

// createCapture creates the capture file path for writing records as they come. A
// capture is data: an existing file is refused unless force is set, and then truncated
// in place (keeping its mode). Like a derived file, a path that is a symbolic link, a
// device, a FIFO, a socket or a folder is refused, force or not.
func createCapture(path string, force bool) (*os.File, error) {
	if _, err := checkTarget(path); err != nil {
		return nil, err
	}
	flags := os.O_WRONLY | os.O_CREATE | os.O_EXCL | noFollow
	if force {
		flags = os.O_WRONLY | os.O_CREATE | os.O_TRUNC | noFollow
	}
	f, err := os.OpenFile(path, flags, 0o644)
	if errors.Is(err, fs.ErrExist) {
		return nil, fmt.Errorf("%s exists; choose another file or add --force to overwrite it", telemetry.SanitizeN([]byte(path), 200))
	}
	if err != nil {
		return nil, telemetry.CleanPathError(err)
	}
	return f, nil
}
