//go:build unix

package wire

import (
	"errors"
	"io/fs"
	"os"

	"golang.org/x/sys/unix"
)

// CheckPort tells at once, without opening it (opening may reset a board), whether path
// can be a serial port to open: it exists (through links), is a character device, and is
// readable and writable by this user. The error is a *SerialError of the same kind as an
// open would give (ErrPortNotFound, ErrNotSerial, ErrPermission), with the same advice.
func CheckPort(path string) error {
	fi, err := os.Stat(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return &SerialError{Path: path, Op: "open", Kind: ErrPortNotFound}
		}
		if errors.Is(err, fs.ErrPermission) {
			return &SerialError{Path: path, Op: "open", Kind: ErrPermission, Err: err}
		}
		return &SerialError{Path: path, Op: "open", Err: err}
	}
	if fi.Mode()&fs.ModeCharDevice == 0 {
		return &SerialError{Path: path, Op: "open", Kind: ErrNotSerial}
	}
	if err := unix.Access(path, unix.R_OK|unix.W_OK); err != nil {
		return &SerialError{Path: path, Op: "open", Kind: ErrPermission, Err: err}
	}
	return nil
}
