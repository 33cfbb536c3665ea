package telemetry

// Extra is one value of an unknown key on a data line, kept as a named channel.
// Name is interned by the Parser: the same key gives the same string, without an
// allocation per line.
type Extra struct {
	Name  string
	Value float64
}
