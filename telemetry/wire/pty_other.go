//go:build !unix

package wire

import (
	"context"
	"errors"
	"os"
)

// errNoPTY is what every pseudo-terminal function returns on a system without them.
var errNoPTY = errors.New("wire: pseudo-terminals are not supported on this system (they need a Unix system)")

// PTY is a pseudo-terminal; on this system none can be opened.
type PTY struct{}

// OpenPTY reports that pseudo-terminals are not supported on this system.
func OpenPTY() (*PTY, error) { return nil, errNoPTY }

// Path returns the empty string: there is no device.
func (p *PTY) Path() string { return "" }

// Master returns nil: there is no device.
func (p *PTY) Master() *os.File { return nil }

// Symlink reports that pseudo-terminals are not supported on this system.
func (p *PTY) Symlink(link string) error { return errNoPTY }

// Close does nothing.
func (p *PTY) Close() error { return nil }

// Serve reports that pseudo-terminals are not supported on this system.
func Serve(ctx context.Context, b Device, opt ServeOptions) error { return errNoPTY }

// ServePTY reports that pseudo-terminals are not supported on this system.
func ServePTY(ctx context.Context, b Device, p *PTY) error { return errNoPTY }
