package loop

import (
	"bufio"
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"sort"
	"strconv"
	"strings"
	"testing"
	"time"
)

// The SPICE cross-check: the model runs a loop, the drive pattern it produced is
// replayed into a netlist of the same circuit (voltage-controlled switches for the
// pin, R, C, load, leak and an NPN follower), ngspice simulates it in batch mode and
// the two waveforms are compared at the model's sample instants.
//
// Source of the check values: ngspice, an independent general-purpose circuit
// simulator (Debian package ngspice), with tight tolerances (reltol 1e-6).

// spiceBJT is the generic NPN of the follower cases: Gummel-Poon with only IS and BF
// set (no Early effect, no resistances), so Ic = IS (exp(Vbe/VT) - 1), Ib = Ic/BF.
const (
	spiceIS = 1e-14
	spiceBF = 100
	// spiceVT is kT/q at ngspice's default 27 C (k = 1.380649e-23 J/K,
	// q = 1.602176634e-19 C, SI 2019 exact values).
	spiceVT = 1.380649e-23 * 300.15 / 1.602176634e-19
)

func needNgspice(t *testing.T) string {
	t.Helper()
	if testing.Short() {
		t.Skip("-short: skips the SPICE cross-check (it runs ngspice)")
	}
	p, err := exec.LookPath("ngspice")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatalf("ngspice is required in CI (CI=true) but was not found: %v", err)
		}
		t.Skip("ngspice not found on PATH: skipping the SPICE cross-check (install the ngspice package to run it)")
	}
	return p
}

// netlist writes the circuit of cfg driven by the drives of steps (steps[k].U holds
// from steps[k].T to steps[k+1].T) up to tEnd.
func netlist(cfg Config, steps []Sample, tEnd float64) string {
	ci := cfg.Circuit
	var b strings.Builder
	g := func(x float64) string { return strconv.FormatFloat(x, 'g', 17, 64) }
	fmt.Fprintf(&b, "* caploop loop model cross-check\n")
	fmt.Fprintf(&b, "Vs vs 0 DC %s\n", g(ci.Supply))
	// one control source per switch: 1 V closes it
	pwl := func(name string, on func(Drive) bool) {
		fmt.Fprintf(&b, "%s %s 0 PWL(", name, strings.ToLower(name))
		lvl := func(d Drive) string {
			if on(d) {
				return "1"
			}
			return "0"
		}
		fmt.Fprintf(&b, "0 %s", lvl(steps[0].U))
		for k := 1; k < len(steps); k++ {
			if on(steps[k].U) != on(steps[k-1].U) {
				tk := steps[k].T
				fmt.Fprintf(&b, "\n+ %s %s %s %s", g(tk), lvl(steps[k-1].U), g(tk+1e-9), lvl(steps[k].U))
			}
		}
		fmt.Fprintf(&b, "\n+ %s %s)\n", g(tEnd+cfg.Period), lvl(steps[len(steps)-1].U))
	}
	pwl("Vch", func(d Drive) bool { return d == Charge })
	pwl("Vdc", func(d Drive) bool { return d == Discharge })
	fmt.Fprintf(&b, "S1 vs n1 vch 0 swm\nR1 n1 x %s\n", g(ci.RCharge()))
	fmt.Fprintf(&b, "S2 x n2 vdc 0 swm\nR2 n2 0 %s\n", g(ci.RDis()))
	fmt.Fprintf(&b, "C1 x 0 %s IC=%s\n", g(ci.C), g(cfg.V0))
	if ci.Load > 0 {
		fmt.Fprintf(&b, "RL x 0 %s\n", g(ci.Load))
	}
	if ci.Leak > 0 {
		fmt.Fprintf(&b, "RK x 0 %s\n", g(ci.Leak))
	}
	probes := "v(x)"
	if ci.HasFollower() {
		fmt.Fprintf(&b, "Q1 vs x e qn\nRE e 0 %s\n", g(ci.Follower.RE))
		fmt.Fprintf(&b, ".model qn NPN(IS=%s BF=%s)\n", g(spiceIS), g(spiceBF))
		probes += " v(e)"
	}
	// RON 1 mOhm adds 2e-8 relative to 47 kOhm; ROFF 1e13 Ohm with 1 uF is a
	// 1e7 s leak: both far below the compared error.
	fmt.Fprintf(&b, ".model swm SW(RON=1m ROFF=1e13 VT=0.5 VH=0)\n")
	fmt.Fprintf(&b, ".options reltol=1e-6 abstol=1e-13 vntol=1e-9\n")
	fmt.Fprintf(&b, ".tran %s %s 0 %s UIC\n", g(cfg.Period/20), g(tEnd), g(cfg.Period/20))
	fmt.Fprintf(&b, ".control\nset wr_singlescale\nset wr_vecnames\nrun\nwrdata out.txt %s\nquit\n.endc\n.end\n", probes)
	return b.String()
}

// runSpice runs ngspice on the netlist and returns the columns of its wrdata output
// (time first).
func runSpice(t *testing.T, bin, net string) [][]float64 {
	t.Helper()
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "loop.cir"), []byte(net), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, "-b", "loop.cir")
	cmd.Dir = dir
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	start := time.Now()
	if err := cmd.Run(); err != nil {
		t.Fatalf("ngspice: %v\n%s", err, out.String())
	}
	t.Logf("ngspice ran in %v", time.Since(start).Round(time.Millisecond))
	f, err := os.Open(filepath.Join(dir, "out.txt"))
	if err != nil {
		t.Fatalf("ngspice wrote no waveform: %v\n%s", err, out.String())
	}
	defer f.Close()
	var cols [][]float64
	sc := bufio.NewScanner(f)
	for line := 0; sc.Scan(); line++ {
		fs := strings.Fields(sc.Text())
		if line == 0 || len(fs) == 0 { // vector names
			continue
		}
		if cols == nil {
			cols = make([][]float64, len(fs))
		}
		if len(fs) != len(cols) {
			t.Fatalf("out.txt:%d: %d columns, want %d", line+1, len(fs), len(cols))
		}
		for i, s := range fs {
			x, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatalf("out.txt:%d: %v", line+1, err)
			}
			cols[i] = append(cols[i], x)
		}
	}
	if len(cols) == 0 || len(cols[0]) < 10 {
		t.Fatalf("ngspice waveform too short\n%s", out.String())
	}
	return cols
}

// at interpolates column y of the time column ts linearly at t.
func at(ts, y []float64, t float64) float64 {
	i := sort.SearchFloat64s(ts, t)
	switch {
	case i == 0:
		return y[0]
	case i >= len(ts):
		return y[len(y)-1]
	}
	f := (t - ts[i-1]) / (ts[i] - ts[i-1])
	return y[i-1] + f*(y[i]-y[i-1])
}

// spiceFollower solves the SPICE transistor for node voltage v:
// v = Vbe + RE Ie, Ie = IS (1 + 1/BF) (exp(Vbe/VT) - 1); it returns the base current
// and the emitter voltage.
func spiceFollower(v, re float64) (ib, ve float64) {
	lo, hi := -1.0, math.Max(v, 0)+1
	for range 200 {
		m := (lo + hi) / 2
		ie := spiceIS * (1 + 1.0/spiceBF) * math.Expm1(m/spiceVT)
		if m+re*ie > v {
			hi = m
		} else {
			lo = m
		}
	}
	vbe := (lo + hi) / 2
	ic := spiceIS * math.Expm1(vbe/spiceVT)
	return ic / spiceBF, v - vbe
}

func TestNgspice(t *testing.T) {
	bin := needNgspice(t)
	// The model's VBE for the follower cases: the diode law at 0.2 mA emitter current,
	// VT ln(0.2 mA / IS) = 0.613 V, about the current of these circuits.
	vbe := spiceVT * math.Log(2e-4/spiceIS)
	cases := []struct {
		name string
		edit func(*Config)
		n    int64
		sp   func(k int64) int
	}{
		{"three-state loaded, split resistors", func(c *Config) {
			c.Circuit.RDischarge, c.Circuit.RPin, c.Circuit.Load = 33e3, 25, 470e3
			c.Controller = Controller{Kind: ThreeState, Deadband: 2}
		}, 900, func(k int64) int { return 300 + 400*int(k/300%2) }},
		{"two-state leaky", func(c *Config) {
			c.Circuit.Leak = 2e6
			c.Controller = Controller{Kind: TwoState}
			c.V0 = 1
		}, 400, func(int64) int { return 512 }},
		{"open duty, jittered instants", func(c *Config) {
			c.Controller = Controller{Kind: OpenDuty, Duty: 0.3, CycleSamples: 20}
			c.Jitter = 100e-6
			c.Seed = 3
		}, 400, nil},
		{"follower three-state from 0 V", func(c *Config) {
			c.Circuit.Load = 1e6
			c.Circuit.Follower = Follower{VBE: vbe, Beta: spiceBF, RE: 10e3}
			c.Controller = Controller{Kind: ThreeState, Deadband: 2}
		}, 900, func(k int64) int { return 300 + 300*int(k/300%2) }},
		{"follower two-state, crossing VBE", func(c *Config) {
			c.Circuit.Follower = Follower{VBE: vbe, Beta: spiceBF, RE: 4.7e3}
			c.Controller = Controller{Kind: TwoState}
			c.V0 = 2
		}, 600, func(k int64) int { return 500 * int(k/200%2) }},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			cfg := bench()
			tc.edit(&cfg)
			var steps []Sample
			if err := Run(cfg, tc.sp, tc.n, func(s Sample) { steps = append(steps, s) }); err != nil {
				t.Fatal(err)
			}
			tEnd := steps[len(steps)-1].T
			cols := runSpice(t, bin, netlist(cfg, steps, tEnd))
			ts := cols[0]
			ci := cfg.Circuit

			// Node bound. Without a follower the model and the netlist are the same
			// linear circuit: 0.5 % of the value (floor 50 uV near 0 V).
			// With a follower the model's only approximation is its base current
			// max(0, V - VBE) / ((beta+1) RE) with a constant VBE, where SPICE's diode
			// law gives VBE = VT ln(Ie/IS). Let dI be the largest difference of the two
			// base currents over 0..Supply. The node error e obeys
			// C |e|' <= dI - G |e|, G the conductance to the node without the
			// follower under the drive of the period (the rest of the network,
			// follower included, only pulls the two waveforms together), so over a
			// period of length dt
			//	|e|(k+1) <= |e|(k) a + dI/G (1 - a),  a = exp(-G dt / C)
			// (|e| + dI dt / C when G = 0). The recursion gives a bound per sample.
			bound := make([]float64, len(steps))
			var dI float64
			if ci.HasFollower() {
				for v := 0.0; v <= ci.Supply; v += 1e-3 {
					ib, _ := spiceFollower(v, ci.Follower.RE)
					ibm := math.Max(0, v-ci.Follower.VBE) * ci.followerG()
					dI = math.Max(dI, math.Abs(ib-ibm))
				}
				for k := 1; k < len(steps); k++ {
					_, g := ci.thevenin(steps[k-1].U, false)
					dt := steps[k].T - steps[k-1].T
					if g > 0 {
						a := math.Exp(-g * dt / ci.C)
						bound[k] = bound[k-1]*a + dI/g*(1-a)
					} else {
						bound[k] = bound[k-1] + dI*dt/ci.C
					}
				}
				t.Logf("follower model error: base currents differ by at most %.3g A; node bound up to %.3g V", dI, slices.Max(bound))
			}
			var worstV, worstE, worstVrel float64
			bad := 0
			for _, s := range steps {
				if s.T < ts[0] {
					continue // ngspice's output starts at its first step after t = 0
				}
				vs := at(ts, cols[1], s.T)
				d := math.Abs(s.V - vs)
				worstV = math.Max(worstV, d)
				if math.Abs(vs) > 1e-3 {
					worstVrel = math.Max(worstVrel, d/math.Abs(vs))
				}
				// 0.5 % of the value (the target of the check) for the plain circuit;
				// the derived bound plus ngspice's own tolerance with a follower.
				lim := math.Max(0.005*math.Abs(vs), 50e-6)
				if ci.HasFollower() {
					lim = bound[s.K] + 1e-4*math.Abs(vs) + 1e-6
				}
				if d > lim {
					bad++
					if bad <= 5 {
						t.Errorf("k=%d t=%.6f s: model V = %.6f V, ngspice %.6f V (diff %.3g > %.3g)", s.K, s.T, s.V, vs, d, lim)
					}
				}
				if ci.HasFollower() {
					// Sense bound: SPICE's emitter voltage is 1-Lipschitz in the node
					// voltage (dVe/dV = RE/(RE + re) <= 1), so
					// |Ve_model - Ve_spice| <= |e| + |Ve_model(V) - Ve_spice(V)|.
					_, vem := spiceFollower(s.V, ci.Follower.RE)
					es := at(ts, cols[2], s.T)
					de := math.Abs(s.Sense - es)
					worstE = math.Max(worstE, de)
					elim := bound[s.K] + math.Abs(s.Sense-vem) + 1e-4*math.Abs(es) + 1e-6
					if de > elim {
						bad++
						if bad <= 5 {
							t.Errorf("k=%d: model sense %.6f V, ngspice emitter %.6f V (diff %.3g > %.3g)", s.K, s.Sense, es, de, elim)
						}
					}
				}
			}
			t.Logf("%d samples: largest node difference %.3g V (%.3g relative), largest sense difference %.3g V", len(steps), worstV, worstVrel, worstE)
		})
	}
}
