package analysis_test

// The ngspice cases of the accuracy suite: the loop runs closed here (the drive chosen
// from each noisy reading by the firmware's rule), the drive sequence is replayed into a
// netlist of the same RC (switches for the pin, R, C, load), ngspice (an independent
// general-purpose circuit simulator, Debian package ngspice) computes the transient, its
// node voltage is sampled at the sample instants and quantised with the same noise, and
// the capture goes through the summary and the same truth and tolerances as the grid,
// with ngspice's waveform as the noise-free level.

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/caploop/caploop/analysis/loop"
)

type spiceCase struct {
	name string
	p    plantParams
	sps  []float64 // one segment per setpoint, fraction of full scale
	n    int       // samples per segment
}

var spiceCases = []spiceCase{
	{"spice-3s-load21-10b-5V-n1-tau47-db6", plantParams{kind: three, db: 6, bits: 10, vref: 5, supply: 5, r: 47e3, c: 1e-6, load: 1e6, period: 1e-3, noise: 1}, []float64{0.3, 0.6}, 1500},
	{"spice-2s-none-12b-3V3-n1-tau22", plantParams{kind: two, bits: 12, vref: 3.3, supply: 3.3, r: 22e3, c: 1e-6, period: 1e-3, noise: 1}, []float64{0.5, 0.3}, 800},
	{"spice-2s-load5-10b-5V-n0.7-tau27", plantParams{kind: two, bits: 10, vref: 5, supply: 5, r: 33e3, c: 1e-6, load: 150e3, period: 1e-3, noise: 0.7}, []float64{0.35, 0.6}, 800},
}

// TestAccuracySpice scores the summary of the ngspice captures.
func TestAccuracySpice(t *testing.T) {
	if testing.Short() {
		t.Skip("-short: the ngspice accuracy cases run ngspice")
	}
	bin, err := exec.LookPath("ngspice")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("ngspice is required in CI (CI=true) but was not found: %v", err)
		}
		t.Skip("ngspice not found on PATH: skipping the ngspice accuracy cases (install the ngspice package to run them)")
	}
	var res results
	t.Run("case", func(t *testing.T) {
		for i, sc := range spiceCases {
			t.Run(sc.name, func(t *testing.T) {
				t.Parallel()
				c := sc.build(t, bin, uint64(104729*(i+1)))
				res.add(c.name, score(t, c))
			})
		}
	})
	reportGaps(t, &res, len(spiceCases), func(kase string) bool { return strings.HasPrefix(kase, "spice-") })
}

// build runs the loop closed with the exact node equation (loop.Circuit.Advance), replays
// its drive into ngspice and writes the capture from ngspice's waveform.
func (sc spiceCase) build(t *testing.T, bin string, seed uint64) *capture {
	t.Helper()
	p := sc.p
	ci := loop.Circuit{Supply: p.supply, R: p.r, C: p.c, Load: p.load}
	rng := rand.New(rand.NewPCG(seed, 1))
	fs := p.fullScale()
	code := func(v, noise float64) int {
		x := math.Floor(v/p.lsb() + noise + 0.5)
		return int(math.Max(0, math.Min(fs-1, x)))
	}
	type sample struct {
		t, v, noise float64
		sp, pv      int
		u           loop.Drive
	}
	var ss []sample
	v := 0.0
	for _, f := range sc.sps {
		sp := int(math.Round(f * fs))
		for range sc.n {
			s := sample{t: float64(len(ss)) * p.period, v: v, noise: p.noise * rng.NormFloat64(), sp: sp}
			s.pv = code(v, s.noise)
			s.u = rule(p, s.pv, sp)
			ss = append(ss, s)
			v = ci.Advance(v, s.u, p.period)
		}
	}
	tEnd := ss[len(ss)-1].t
	ts, vs := runNgspice(t, bin, spiceNetlist(p, len(ss), func(k int) loop.Drive { return ss[k].u }, tEnd))

	c := &capture{name: sc.name, p: p}
	var w writer
	w.printf("%s", p.metaLine())
	worst, flips := 0.0, 0
	for k, s := range ss {
		if k > 0 && s.sp != ss[k-1].sp || k == 0 {
			c.segs = append(c.segs, segSpan{from: k, sp: s.sp})
		}
		vx := interp(ts, vs, s.t)
		if s.t < ts[0] {
			vx = 0 // ngspice's output starts at its first step: before it, the IC=0
		}
		worst = math.Max(worst, math.Abs(vx-s.v))
		pv := code(vx, s.noise)
		if pv != s.pv {
			flips++ // the same noise lands on the other side of a code edge
		}
		line := w.dataLine(int64(math.Round(s.t*1e6)), int64(k), s.sp, pv, s.u, false)
		c.recs = append(c.recs, rec{line: line, t: s.t, sp: s.sp, pv: pv, u: s.u, sense: vx})
	}
	for i := range c.segs {
		c.segs[i].to = len(c.recs)
		if i+1 < len(c.segs) {
			c.segs[i].to = c.segs[i+1].from
		}
	}
	c.text = w.b.Bytes()
	// The model and ngspice are the same linear circuit: they agree to a few hundredths
	// of an LSB (the switch edges, ngspice's tolerances); a tenth of an LSB or more means
	// the netlist or the replay is wrong.
	if worst > 0.1*p.lsb() {
		t.Fatalf("ngspice and the loop model differ by %.3g V at a sample instant", worst)
	}
	t.Logf("ngspice vs loop model: largest node difference %.3g V; %d of %d readings changed code", worst, flips, len(ss))
	return c
}

// rule is the firmware's choice of drive from reading pv (DOMAIN.md).
func rule(p plantParams, pv, sp int) loop.Drive {
	e := pv - sp
	if p.kind == loop.TwoState {
		if e < 0 {
			return loop.Charge
		}
		return loop.Discharge
	}
	switch {
	case e > p.db:
		return loop.Discharge
	case e < -p.db:
		return loop.Charge
	}
	return loop.Hold
}

// spiceNetlist writes the RC of p driven by u(k) over sample k. The pin is a
// piecewise-linear source (the supply for charge, 0 V for discharge) behind R; for hold
// (three-state) a voltage-controlled switch in series with R opens. Each change is a ramp
// of edge = T/1000 centred on the sample instant, so the drive's charge is unchanged to
// first order; at the instant itself the node has moved by about Vs edge / (4 tau), far
// below one LSB. A sharper edge only makes ngspice slower.
func spiceNetlist(p plantParams, n int, u func(k int) loop.Drive, tEnd float64) string {
	edge := p.period / 1000
	var b strings.Builder
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', 15, 64) }
	fmt.Fprintf(&b, "* caploop accuracy case\n")
	pwl := func(name, node string, lvl func(k int) float64) {
		fmt.Fprintf(&b, "%s %s 0 PWL(0 %s", name, node, g(lvl(0)))
		for k := 1; k < n; k++ {
			if lvl(k) != lvl(k-1) {
				tk := float64(k) * p.period
				fmt.Fprintf(&b, "\n+ %s %s %s %s", g(tk-edge/2), g(lvl(k-1)), g(tk+edge/2), g(lvl(k)))
			}
		}
		fmt.Fprintf(&b, "\n+ %s %s)\n", g(tEnd+p.period), g(lvl(n-1)))
	}
	pin := make([]float64, n) // hold keeps the last level: the switch is open then
	for k := range pin {
		switch {
		case u(k) == loop.Charge:
			pin[k] = p.supply
		case u(k) == loop.Hold && k > 0:
			pin[k] = pin[k-1]
		}
	}
	pwl("Vpin", "pin", func(k int) float64 { return pin[k] })
	if p.kind == loop.ThreeState {
		pwl("Ven", "en", func(k int) float64 {
			if u(k) == loop.Hold {
				return 0
			}
			return 1
		})
		fmt.Fprintf(&b, "S1 pin n1 en 0 swm\nR1 n1 x %s\n", g(p.r))
		// RON 1 mOhm against tens of kOhm and ROFF 1e13 Ohm against 1 uF (a 1e7 s
		// leak) are far below the tolerances checked.
		fmt.Fprintf(&b, ".model swm SW(RON=1m ROFF=1e13 VT=0.5 VH=0)\n")
	} else {
		fmt.Fprintf(&b, "R1 pin x %s\n", g(p.r))
	}
	fmt.Fprintf(&b, "C1 x 0 %s IC=0\n", g(p.c))
	if p.load > 0 {
		fmt.Fprintf(&b, "RL x 0 %s\n", g(p.load))
	}
	fmt.Fprintf(&b, ".options reltol=1e-6 abstol=1e-13 vntol=1e-9\n")
	fmt.Fprintf(&b, ".tran %s %s 0 %s UIC\n", g(p.period/4), g(tEnd), g(p.period/4))
	fmt.Fprintf(&b, ".control\nset wr_singlescale\nset wr_vecnames\nrun\nwrdata out.txt v(x)\nquit\n.endc\n.end\n")
	return b.String()
}

// runNgspice runs ngspice in batch mode on the netlist and returns time and v(x).
func runNgspice(t *testing.T, bin, net string) (ts, vs []float64) {
	t.Helper()
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "case.cir"), []byte(net), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, "-b", "case.cir")
	cmd.Dir = dir
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	start := time.Now()
	if err := cmd.Run(); err != nil {
		t.Fatalf("ngspice: %v\n%s", err, tail(out.String()))
	}
	t.Logf("ngspice ran in %v", time.Since(start).Round(time.Millisecond))
	f, err := os.Open(filepath.Join(dir, "out.txt"))
	if err != nil {
		t.Fatalf("ngspice wrote no waveform: %v\n%s", err, tail(out.String()))
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for line := 1; sc.Scan(); line++ {
		fs := strings.Fields(sc.Text())
		if line == 1 || len(fs) == 0 { // vector names
			continue
		}
		if len(fs) != 2 {
			t.Fatalf("out.txt:%d: %d columns, want 2", line, len(fs))
		}
		x, err1 := strconv.ParseFloat(fs[0], 64)
		y, err2 := strconv.ParseFloat(fs[1], 64)
		if err1 != nil || err2 != nil {
			t.Fatalf("out.txt:%d: %q", line, sc.Text())
		}
		ts, vs = append(ts, x), append(vs, y)
	}
	if len(ts) < 10 {
		t.Fatalf("ngspice waveform too short\n%s", tail(out.String()))
	}
	return ts, vs
}

func tail(s string) string {
	if len(s) > 2000 {
		return "…" + s[len(s)-2000:]
	}
	return s
}

// interp interpolates y(ts) linearly at x (a timepoint falls on every sample instant: the
// switch edges are breakpoints).
func interp(ts, y []float64, x float64) float64 {
	i := sort.SearchFloat64s(ts, x)
	switch {
	case i == 0:
		return y[0]
	case i >= len(ts):
		return y[len(y)-1]
	}
	f := (x - ts[i-1]) / (ts[i] - ts[i-1])
	return y[i-1] + f*(y[i]-y[i-1])
}
