// Package telemetry is caploop's line protocol: what a board prints and what a capture
// holds, with the standard library only.
//
// A board prints one line per sample period: a data line (t=, n=, sp=, pv=, u= and any
// extra channels, or a numeric table row after a header), meta lines starting with '#'
// (vref, adc_bits, period_us, mode, deadband, supply, r, c, load, accepts) and comments.
// Parser turns one line into a Record: a Sample, a Meta change, a host event or a reject
// with its reason; Scanner reads a Source (a file, standard input, gzip) line by line
// with bounded memory and counts what it rejected and dropped, naming file and line. The
// capture format (CaptureWriter) keeps the board's raw lines with their host receive
// times and the host's own events, so a capture replays exactly.
//
// Values are held to one input range table (Ranges, CheckRange): a meta value outside it
// is dropped with a reason, a reading outside 0..2^bits-1 is rejected. Sanitize makes any
// text from outside safe to show before it reaches a terminal, a report or an XML file.
//
// Bytes in and out (serial ports, pseudo-terminals, the reconnecting Link, the virtual
// board's serving) live in the transport package telemetry/wire, above this one.
package telemetry
