//go:build unix

package firmware

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
)

// ErrNoCompiler is returned (wrapped) by Build when there is no C compiler: $CC, or cc
// on the PATH.
var ErrNoCompiler = errors.New("firmware: no C compiler (set CC or install cc)")

// Compiler returns the C compiler Build uses: $CC when set, else cc from the PATH.
func Compiler() (string, error) {
	cc := os.Getenv("CC")
	if cc == "" {
		cc = "cc"
	}
	p, err := exec.LookPath(cc)
	if err != nil {
		return "", fmt.Errorf("%w: %v", ErrNoCompiler, err)
	}
	return p, nil
}

// Flags the loop is held to: C99 without extensions, every warning an error, and no
// hosted library (-ffreestanding), so the file builds for a microcontroller as it is.
var (
	loopFlags = []string{"-std=c99", "-pedantic", "-Wall", "-Wextra", "-Wconversion", "-Wsign-conversion",
		"-Wshadow", "-Werror", "-ffreestanding", "-O2"}
	hostFlags = []string{"-std=c99", "-pedantic", "-Wall", "-Wextra", "-Werror", "-O2"}
)

// Build compiles the reference loop in src (the directory holding loop.c, loop.h and
// hal.h) with its host hardware layer (src/host/hal_host.c) into dir and returns the
// program's path. The compiler's messages are in the error.
func Build(ctx context.Context, src, dir string) (string, error) {
	cc, err := Compiler()
	if err != nil {
		return "", err
	}
	obj := filepath.Join(dir, "loop.o")
	prog := filepath.Join(dir, "loop-host")
	steps := [][]string{
		append(append([]string{}, loopFlags...), "-c", filepath.Join(src, "loop.c"), "-o", obj),
		append(append([]string{}, hostFlags...), filepath.Join(src, "host", "hal_host.c"), obj, "-o", prog),
	}
	for _, args := range steps {
		out, err := exec.CommandContext(ctx, cc, args...).CombinedOutput()
		if err != nil {
			return "", fmt.Errorf("firmware: %s %s: %v\n%s", filepath.Base(cc), strings.Join(args, " "), err, out)
		}
	}
	return prog, nil
}

// FindSource walks up from dir to the directory that holds testdata/firmware/loop.c
// and returns testdata/firmware there.
func FindSource(dir string) (string, error) {
	d, err := filepath.Abs(dir)
	if err != nil {
		return "", err
	}
	for {
		src := filepath.Join(d, "testdata", "firmware")
		if _, err := os.Stat(filepath.Join(src, "loop.c")); err == nil {
			return src, nil
		}
		up := filepath.Dir(d)
		if up == d {
			return "", fmt.Errorf("firmware: no testdata/firmware/loop.c above %s", dir)
		}
		d = up
	}
}
