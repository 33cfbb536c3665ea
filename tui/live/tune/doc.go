// Package tune is the sequencer behind `caploop tune`: from an unknown board to a tuned,
// verified loop in one run, headless (no terminal library is imported here).
//
// The run has six steps:
//
//  1. Ask: `info` is the only line sent before the user confirms. The answer's meta
//     lines and its accepts= key say which steps run by themselves (set sp, deadband,
//     mode, period_us) and which need the user (guided mode: dial the setpoint in).
//
//  2. Safety: a range of volts the output may visit (default: the setpoints in use);
//     tune never commands a setpoint outside it. A reading outside the range plus a
//     margin, a quit or a signal sends the restore line at once (the original sp,
//     deadband, mode and period in one `set`). The plan is shown and confirmed before
//     any `set`.
//
//     Unplug: whatever the step (a hold, or a `set` that could not be sent or was not
//     answered, as at the hand-over from advise to verify), the run waits up to
//     Options.ReplugWait for the board, asks it for its settings again (`info`: a board
//     that reset has lost the band tune set), sends the pass's set line again and waits
//     for its answer before measuring; the readings of the break are kept out of the
//     pass. It resumes after two re-plugs a run at most. A board that does not come back
//     ends the run (ErrUnplugged); the restore line is then sent if the board is back
//     within a second ReplugWait, else Result.RestoreNote says it was not sent.
//
//  3. Identify: large steps up and down across the range with the board's own band
//     (the "before" pass), then the same steps with a wide band whose holds show the
//     droop; each dwell is about 5 tau (tau estimated from the first step), repeated
//     until tau is identifiable by the rule of CONVENTIONS.md, not for a fixed time.
//
//  4. Advise: the deadband (and the period advice) from the advice engine.
//
//  5. Apply and verify: the advised deadband is sent and the same steps run again (the
//     "after" pass); Compare gives the before/after line.
//
//  6. Record: WriteRecord writes the capture's summary JSON, the before/after HTML
//     report and a C header of constants into the record folder.
//
//     res, err := tune.Run(ctx, link, tune.Options{Progress: os.Stderr})
package tune
