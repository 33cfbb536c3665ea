// Package loop is the exact model of a switched-RC analog output loop: a digital pin
// charges a capacitor through a resistor, the board's ADC reads the level back once
// per sample period, and the firmware charges, holds or discharges to follow a
// setpoint.
//
// # Model
//
// The capacitor node sees, for each drive, a linear network: the charge path (Supply
// through R + RPin), the discharge path (ground through RDischarge + RPin), nothing for
// hold (the pin floats), a Load and a Leak to ground, and the base of an optional
// emitter follower. Its Thevenin equivalent gives Vinf and tau, and for a drive held
// over an interval dt the node follows the closed form
//
//	V(t + dt) = Vinf + (V(t) - Vinf) exp(-dt / tau)
//
// so the simulation is exact at the sample instants whatever dt/tau is (no Euler
// steps). The follower draws base current (V - VBE) / ((beta+1) RE) only while
// V > VBE; the node equation is then piecewise linear, and when the node crosses VBE
// within a period the crossing time is solved in closed form and the period finished
// in the other regime (Circuit.Advance). The follower's VBE and beta are constants:
// a real transistor's VBE grows with the logarithm of its current, which the model
// ignores (a few millivolts on the node, tens of millivolts at the sense point near
// cut-off for ordinary parts; the ngspice test states the bound).
//
// # Sampling and control
//
// Sample k is taken at t_k = k T (plus Gaussian jitter truncated at T/2, if set).
// The ADC reads the sense point (the node, or the follower's emitter
// max(0, V - VBE)) as
//
//	code = clamp(floor(Vsense / (Vref (1+VrefError)) 2^bits (1+Gain) + Offset + noise + 1/2), 0, 2^bits - 1)
//
// that is, it rounds to the nearest code, so the code is an unbiased reading whose
// quantization error is LSB/sqrt(12) rms (see ADC.Code). The controller reacts to
// the code it just read (e = pv - sp): two-state charges when e < 0 and discharges
// otherwise; three-state discharges when e > db, charges when e < -db and holds
// otherwise. Open-loop kinds (a square wave of a given duty, a repeating pattern, a
// constant drive) exist so the model can be checked against closed forms. The drive
// picked after sample k holds until sample k+1: that is what u on a data line means.
// A dropped sample is lost from the telemetry only; control runs on.
//
// Noise, jitter and drops come from three PCG streams of Config.Seed, so a run is
// repeatable and switching one of them on does not change the others.
//
// # Use
//
// New builds a Sim and Next advances it one sample at a time (the virtual board);
// Run simulates n samples in one call (the advice engine). Circuit.Tau, Circuit.VInf,
// Circuit.Advance and Circuit.StepMax give the figures of a design without a run.
// A Sim does no I/O and never reads the clock; about 20 ns per sample.
//
//	cfg := loop.Config{
//		Circuit:    loop.Circuit{Supply: 5, R: 47e3, C: 1e-6},
//		ADC:        loop.ADC{Vref: 5, Bits: 10},
//		Controller: loop.Controller{Kind: loop.ThreeState, Deadband: 2},
//		Period:     1e-3,
//	}
//	err := loop.Run(cfg, func(int64) int { return 512 }, 2000, func(s loop.Step) {
//		fmt.Println(s.K, s.PV, s.U)
//	})
package loop
