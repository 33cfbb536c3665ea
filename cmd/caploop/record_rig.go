package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"github.com/caploop/caploop/telemetry/rig"
	"github.com/caploop/caploop/telemetry/wire"
)

// prepareRig makes the rig folder dir (it may exist) and names a capture per port: the
// board's USB serial number, else the port's name, with a suffix on a collision. It
// refuses to overwrite an existing capture or rig file without force.
func prepareRig(dir string, ports []string, force bool) ([]rig.Board, []string, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, nil, fmt.Errorf("rig folder: %w", err)
	}
	if fi, err := os.Stat(dir); err != nil || !fi.IsDir() {
		return nil, nil, fmt.Errorf("rig folder %s is not a folder", clean(dir))
	}
	infos, _ := wire.ListPorts() // no list: every board is named by its port
	boards := make([]rig.Board, len(ports))
	for i, p := range ports {
		boards[i] = rig.Board{Port: p}
		if info, ok := usbInfo(p, infos); ok {
			boards[i].Serial, boards[i].VIDPID, boards[i].Product = info.Serial, info.VIDPID(), info.Product
		}
	}
	names := rig.Names(boards, ".cap")
	for i := range boards {
		boards[i].Capture = names[i]
	}
	if !force {
		for _, n := range append(names, rig.FileName) {
			if _, err := os.Lstat(filepath.Join(dir, n)); err == nil {
				return nil, nil, fmt.Errorf("%s exists in %s; choose another folder or add --force", n, clean(dir))
			}
		}
	}
	return boards, names, nil
}

// usbInfo finds the port's USB description, matching the path or what it links to (a
// /dev/serial/by-id name leads to the ttyACM node the list names).
func usbInfo(port string, infos []wire.PortInfo) (wire.PortInfo, bool) {
	real, err := filepath.EvalSymlinks(port)
	if err != nil {
		real = port
	}
	for _, in := range infos {
		r2, err := filepath.EvalSymlinks(in.Path)
		if err != nil {
			r2 = in.Path
		}
		if in.Path == port || r2 == real {
			return in, in.USB
		}
	}
	return wire.PortInfo{}, false
}

// runRecordRig records several ports into one folder: a capture per board (each its own
// link and recording, so one board's unplug holds up no other) and the rig file listing
// them. Each board's lines on stderr start with its capture name.
func runRecordRig(ctx context.Context, f recordFlags, ports []string, stderr io.Writer) error {
	if f.out == "" {
		return withCode(2, errors.New("record: --out DIR is needed: the folder for the captures"))
	}
	if f.duration < 0 {
		return withCode(2, fmt.Errorf("record: --duration %v is negative", f.duration))
	}
	if _, err := (recordFlags{baud: f.baud}).serialConfig(); err != nil {
		return withCode(2, err)
	}
	boards, names, err := prepareRig(f.out, ports, f.force)
	if err != nil {
		return withCode(2, fmt.Errorf("record: %w", err))
	}
	if err := rig.Write(f.out, rig.New(boards, time.Now())); err != nil {
		return withCode(2, fmt.Errorf("record: %w", err))
	}
	if !f.quiet {
		fmt.Fprintf(stderr, "recording %d boards into %s (rig file %s); Ctrl-C stops\n", len(ports), clean(f.out), rig.FileName)
	}
	var mu sync.Mutex
	var wg sync.WaitGroup
	errs := make([]error, len(ports))
	for i, p := range ports {
		bf := f
		bf.port = p
		bf.out = filepath.Join(f.out, names[i])
		bf.force = true // checked for the whole rig above
		bf.quiet = true
		w := &prefixWriter{w: stderr, mu: &mu, prefix: names[i] + ": "}
		wg.Add(1)
		go func() {
			defer wg.Done()
			errs[i] = runRecord(ctx, bf, w)
		}()
	}
	wg.Wait()
	code := 0
	var all []error
	for _, e := range errs {
		if e == nil {
			continue
		}
		all = append(all, e)
		var ee *exitError
		if errors.As(e, &ee) && ee.code > code {
			code = ee.code
		} else if code == 0 {
			code = 2
		}
	}
	if len(all) > 0 {
		return withCode(code, errors.Join(all...))
	}
	return nil
}

// prefixWriter starts every line written through it with a prefix, one writer at a time.
type prefixWriter struct {
	w      io.Writer
	mu     *sync.Mutex
	prefix string
}

func (p *prefixWriter) Write(b []byte) (int, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	s := strings.TrimRight(string(b), "\n")
	for _, ln := range strings.Split(s, "\n") {
		if _, err := fmt.Fprintf(p.w, "%s%s\n", p.prefix, strings.TrimLeft(ln, "\r")); err != nil {
			return 0, err
		}
	}
	return len(b), nil
}
