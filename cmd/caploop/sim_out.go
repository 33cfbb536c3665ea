package main

import (
	"io"
)

// simOutput runs write against sim's output: standard output when path is "", else the
// file path, written the way every output of caploop is. A capture (--capture) is data:
// it is written as it comes and an existing file needs force (createCapture). Plain
// telemetry is written all or nothing (writeReplacing): the file appears, or is
// replaced, when the run ends. Either way a symbolic link, a device, a FIFO, a socket or
// a folder at path is refused.
func simOutput(path string, capture, force bool, stdout io.Writer, write func(w io.Writer) error) error {
	if path == "" {
		return write(stdout)
	}
	if !capture {
		return writeReplacing(path, write)
	}
	f, err := createCapture(path, force)
	if err != nil {
		return err
	}
	if err := write(f); err != nil {
		f.Close()
		return err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}
