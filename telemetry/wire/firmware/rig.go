//go:build unix

package firmware

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"strconv"
	"sync"
	"time"

	"github.com/caploop/caploop/analysis/loop"
	"github.com/creack/pty"
	"golang.org/x/sys/unix"
	"golang.org/x/term"
)

// Options describe one firmware-in-the-loop run.
type Options struct {
	// Program is the firmware built by Build.
	Program string
	// Plant is the circuit, ADC, seed and start voltage V0 of the loop model that answers
	// the readings. Its Controller (two-state or three-state, deadband) and Period are the
	// firmware's start-up settings, and its circuit is what the firmware's meta lines
	// declare; the firmware decides the drive itself.
	Plant loop.Config
	// SP is the start-up setpoint, counts.
	SP int
	// TickUS is the simulated time one poll of the firmware's main loop takes, µs; the
	// samples fall exactly on the grid of the period when it is a multiple of the tick.
	// 0 picks a quarter of the period when that is whole, else 1 µs.
	TickUS int
	// Samples ends the run after this many readings (0: until Close).
	Samples int64
	// Speed paces the plant at Speed times real time (0: as fast as the firmware runs,
	// which is as fast as the reader of the port takes the lines).
	Speed float64
	// BeforeRead, when set, is called before the plant answers reading k (0-based); it
	// may block to hold the firmware at that sample, e.g. while a test sends a command.
	BeforeRead func(k int64)
	// OnStep, when set, gets every sample as the plant saw it: the reading, the drive the
	// firmware set after it and the node voltage (SP is 0: the plant does not know it).
	OnStep func(loop.Sample)
}

// Rig is one running firmware in the loop. Close it.
type Rig struct {
	path   string
	master *os.File
	stderr bytes.Buffer

	stopOnce  sync.Once
	closeOnce sync.Once
	stop      chan struct{}
	done      chan struct{}
	mu        sync.Mutex
	err       error
}

// Start opens the pseudo-terminal and returns at once; the firmware powers up when a
// program first opens Path. The run ends after Options.Samples readings, when ctx ends,
// or on Close. At the end the firmware writes out its last lines and exits; the port
// stays open, silent, until Close, so its reader gets every line.
func Start(ctx context.Context, opt Options) (*Rig, error) {
	args, err := opt.args()
	if err != nil {
		return nil, err
	}
	sim, err := loop.New(opt.Plant)
	if err != nil {
		return nil, fmt.Errorf("firmware: plant: %w", err)
	}
	m, sl, err := pty.Open()
	if err != nil {
		return nil, fmt.Errorf("firmware: open pseudo-terminal: %w", err)
	}
	// Raw mode before the slave is closed: no echo of the telemetry back to the firmware,
	// no line editing. A program that opens the port sets its own mode too.
	_, err = term.MakeRaw(int(sl.Fd()))
	path := sl.Name()
	sl.Close()
	if err != nil {
		m.Close()
		return nil, fmt.Errorf("firmware: raw mode: %w", err)
	}
	r := &Rig{path: path, master: m, stop: make(chan struct{}), done: make(chan struct{})}
	go r.run(ctx, opt, args, sim)
	return r, nil
}

// Path returns the serial port of the firmware, a pseudo-terminal slave device.
func (r *Rig) Path() string { return r.path }

// Done is closed when the run has ended and the firmware has exited.
func (r *Rig) Done() <-chan struct{} { return r.done }

// Err returns why the run failed, or nil (also while it runs and after a normal end).
func (r *Rig) Err() error {
	r.mu.Lock()
	defer r.mu.Unlock()
	return r.err
}

// Close ends the run (the firmware flushes its telemetry and exits; it is killed after
// 2 s if it does not), closes the port (an unplug for its reader) and returns Err.
func (r *Rig) Close() error {
	r.stopOnce.Do(func() { close(r.stop) })
	<-r.done
	r.closeOnce.Do(func() { r.master.Close() })
	return r.Err()
}

func (r *Rig) fail(err error) {
	r.mu.Lock()
	if r.err == nil {
		r.err = err
	}
	r.mu.Unlock()
}

// args turns the options into the host program's key=value arguments.
func (opt Options) args() ([]string, error) {
	c := opt.Plant.WithDefaults()
	if err := c.Validate(); err != nil {
		return nil, fmt.Errorf("firmware: plant: %w", err)
	}
	var mode string
	switch c.Controller.Kind {
	case loop.TwoState:
		mode = "two-state"
	case loop.ThreeState:
		mode = "three-state"
	default:
		return nil, fmt.Errorf("firmware: the firmware runs two-state or three-state, not %v", c.Controller.Kind)
	}
	periodUS := math.Round(c.Period * 1e6)
	tick := opt.TickUS
	if tick <= 0 {
		tick = 1
		if int64(periodUS)%4 == 0 {
			tick = int(periodUS) / 4
		}
	}
	ints := []struct {
		key string
		v   float64
		max float64
	}{
		{"vref_mv", math.Round(c.ADC.Vref * 1e3), math.MaxUint16},
		{"adc_bits", float64(c.ADC.Bits), 16},
		{"supply_mv", math.Round(c.Circuit.Supply * 1e3), math.MaxUint16},
		{"r_ohm", math.Round(c.Circuit.R), math.MaxUint32},
		{"c_pf", math.Round(c.Circuit.C * 1e12), math.MaxUint32},
		{"load_ohm", math.Round(c.Circuit.Load), math.MaxUint32},
		{"sp", float64(opt.SP), float64(c.ADC.MaxCode())},
		{"deadband", float64(c.Controller.Deadband), float64(int(1) << c.ADC.Bits / 4)},
		{"period_us", periodUS, 1e6},
		{"tick_us", float64(tick), periodUS},
	}
	args := []string{"mode=" + mode}
	for _, f := range ints {
		if !(f.v >= 0 && f.v <= f.max) {
			return nil, fmt.Errorf("firmware: %s %g is outside the firmware's range 0..%g", f.key, f.v, f.max)
		}
		args = append(args, f.key+"="+strconv.FormatFloat(f.v, 'f', 0, 64))
	}
	if c.ADC.Bits < 4 || periodUS < 50 {
		return nil, fmt.Errorf("firmware: the firmware wants adc_bits 4..16 and a period of 50 µs or more")
	}
	return args, nil
}

// run waits for the port to be opened, starts the firmware and answers its readings.
func (r *Rig) run(ctx context.Context, opt Options, args []string, sim *loop.Sim) {
	defer close(r.done)
	if !r.waitOpen(ctx) {
		return
	}
	// Let the program finish setting the port up before the first byte.
	time.Sleep(20 * time.Millisecond)

	inR, inW, err := os.Pipe() // plant -> firmware
	if err != nil {
		r.fail(err)
		return
	}
	outR, outW, err := os.Pipe() // firmware -> plant
	if err != nil {
		inR.Close()
		inW.Close()
		r.fail(err)
		return
	}
	cmd := exec.Command(opt.Program, args...)
	cmd.ExtraFiles = []*os.File{inR, outW, r.master} // descriptors 3, 4, 5
	cmd.Stderr = &r.stderr
	err = cmd.Start()
	inR.Close()
	outW.Close()
	if err != nil {
		inW.Close()
		outR.Close()
		r.fail(fmt.Errorf("firmware: start: %w", err))
		return
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()

	plantDone := make(chan error, 1)
	go func() { plantDone <- plant(sim, opt, inW, outR) }()
	var perr error
	select {
	case perr = <-plantDone:
	case <-r.stop:
	case <-ctx.Done():
	}
	inW.Close() // end of the run: the firmware flushes and exits
	var werr error
	select {
	case werr = <-exited:
	case <-time.After(2 * time.Second):
		cmd.Process.Kill()
		werr = <-exited
		r.fail(errors.New("firmware: did not exit when the run ended; killed"))
	}
	outR.Close()
	if perr != nil {
		r.fail(perr)
	}
	if werr != nil {
		r.fail(fmt.Errorf("firmware: %v: %s", werr, bytes.TrimSpace(r.stderr.Bytes())))
	}
}

// waitOpen waits until a program opens the port; false when the run was stopped first.
func (r *Rig) waitOpen(ctx context.Context) bool {
	t := time.NewTicker(2 * time.Millisecond)
	defer t.Stop()
	for hungUp(r.master) {
		select {
		case <-ctx.Done():
			return false
		case <-r.stop:
			return false
		case <-t.C:
		}
	}
	return true
}

// hungUp reports whether no program has the slave side of master open.
func hungUp(master *os.File) bool {
	p := []unix.PollFd{{Fd: int32(master.Fd()), Events: unix.POLLOUT}}
	if _, err := unix.Poll(p, 0); err != nil {
		return true
	}
	return p[0].Revents&unix.POLLHUP != 0
}

// plant answers the firmware's lines until opt.Samples readings were answered or the
// firmware goes away:
//
//	d <u>     the drive the firmware set after its last reading
//	a <t_us>  read the ADC at board time t_us: the model holds the last drive from the
//	          last reading to t_us (exactly, in closed form) and answers the code
func plant(sim *loop.Sim, opt Options, w io.Writer, rd io.Reader) error {
	br := bufio.NewReader(rd)
	bw := bufio.NewWriter(w)
	cfg := sim.Config()
	periodUS := uint32(math.Round(cfg.Period * 1e6))
	var (
		k       int64
		last    uint32
		drive   loop.Drive
		boardUS float64
		start   = time.Now()
		buf     []byte
	)
	for {
		line, err := br.ReadSlice('\n')
		if err != nil {
			if errors.Is(err, io.EOF) {
				return nil
			}
			return fmt.Errorf("firmware: plant: %w", err)
		}
		if len(line) < 3 || line[1] != ' ' {
			return fmt.Errorf("firmware: plant: bad request %q", line)
		}
		x, err := strconv.ParseInt(string(bytes.TrimSpace(line[2:])), 10, 64)
		if err != nil {
			return fmt.Errorf("firmware: plant: bad request %q", line)
		}
		switch line[0] {
		case 'd':
			if x < -1 || x > 1 {
				return fmt.Errorf("firmware: plant: drive %d", x)
			}
			drive = loop.Drive(x)
			continue
		case 'a':
		default:
			return fmt.Errorf("firmware: plant: bad request %q", line)
		}
		t := uint32(x)
		if k > 0 {
			if dt := t - last; dt != periodUS {
				cfg.Period = float64(dt) * 1e-6
				if err := sim.SetConfig(cfg); err != nil {
					return fmt.Errorf("firmware: plant: sample %d: %w", k, err)
				}
				periodUS = dt
			}
			st := sim.Apply(0, drive)
			boardUS += float64(periodUS)
			if opt.OnStep != nil {
				opt.OnStep(st)
			}
		}
		if opt.Samples > 0 && k >= opt.Samples {
			return nil
		}
		if opt.BeforeRead != nil {
			opt.BeforeRead(k)
		}
		if opt.Speed > 0 {
			if d := time.Until(start.Add(time.Duration(boardUS * 1e3 / opt.Speed))); d > 0 {
				time.Sleep(d)
			}
		}
		buf = strconv.AppendInt(buf[:0], int64(sim.Read()), 10)
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
		if err := bw.Flush(); err != nil {
			return nil // the firmware went away
		}
		last = t
		k++
	}
}
