// Package firmware runs the reference firmware loop (testdata/firmware: portable C with a
// small hardware layer) in the loop with the loop model: the C program is compiled with
// the host C compiler and its host hardware layer, the model's exact plant step
// (analysis/loop, noise included) answers its ADC readings, and its telemetry goes to a
// pseudo-terminal that caploop opens like a board's serial port.
//
//	prog, err := firmware.Build(ctx, src, t.TempDir())     // ErrNoCompiler without cc
//	rig, err := firmware.Start(ctx, firmware.Options{Program: prog, Plant: cfg, SP: 512})
//	defer rig.Close()
//	link := telemetry.Dial(telemetry.SerialConfig{Path: rig.Path()}, telemetry.LinkOptions{})
//
// The firmware powers up when a program first opens the port (as a board that resets on
// DTR does). Its clock is simulated, so the loop runs as fast as the reader takes its
// lines (or at Options.Speed times real time).
package firmware
