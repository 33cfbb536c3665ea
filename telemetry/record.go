package telemetry

// Extra is one value of an unknown key on a data line, kept as a named channel.
// Name is interned by the Parser: the same key gives the same string, without an
// allocation per line.
type Extra struct {
	Name  string
	Value float64
}

// RecordKind says what a line turned out to be.
type RecordKind uint8

// Record kinds.
const (
	RecNone     RecordKind = iota // blank line, comment, column header or capture header
	RecSample                     // a data line or a numeric row: a Sample
	RecMeta                       // a meta line: Meta changed
	RecEvent                      // a capture '>' or '!' record: an Event
	RecRejected                   // a line that could not be read: counted, with a ParseError
)

// String returns "none", "sample", "meta", "event" or "rejected".
func (k RecordKind) String() string {
	switch k {
	case RecSample:
		return "sample"
	case RecMeta:
		return "meta"
	case RecEvent:
		return "event"
	case RecRejected:
		return "rejected"
	}
	return "none"
}

// Event is a capture record that is not a board line: a line the host sent to the board
// ('>', such as "set deadband=14") or a host event ('!': mark, unplugged, reconnected,
// note). Text is sanitised and safe to print.
type Event struct {
	Host int64     // host time, ns since the capture started
	Dir  Direction // ToBoard or HostEvent
	Text string    // sanitised text of the record
	Line int64     // 1-based line number in the source
}

// Stats counts the lines a Parser or Scanner has seen. Every line falls in exactly one
// of Samples, Metas, Comments, Blank, Headers, Events and Rejected, so they add up to
// Lines. Partial counts the rejected lines that look like a piece of a line (two lines
// glued together by a board reset, or the tail of a line), and is part of Rejected.
type Stats struct {
	Lines, Samples, Metas, Comments, Rejected, Partial int64
	Events                                             int64 // capture '>' and '!' records
	Blank                                              int64 // empty lines
	Headers                                            int64 // column header lines and the capture header line

	// ByReason counts the rejected lines by reason; read it with Rejects or RejectReasons.
	ByReason [numReasons]int64

	// FirstRejects holds the first MaxRejectsKept rejected lines, in order.
	FirstRejects []*ParseError

	// Dropped counts the values dropped from lines that were kept: a meta value outside
	// its range or unreadable, an extra channel beyond the 256 names or unreadable. The
	// line itself counts as a sample or meta line. FirstDrops holds the first
	// MaxRejectsKept of them, in order, with Dropped set.
	Dropped    int64
	FirstDrops []*ParseError
}

// Record is what Parser.Parse makes of one line.
type Record struct {
	Kind   RecordKind
	Sample Sample      // valid for RecSample
	Extras []Extra     // extra channels of the sample; valid until the next Parse
	Meta   Meta        // merged meta after this line; valid for every kind
	Delta  Meta        // the fields this line set, for RecMeta
	Event  Event       // valid for RecEvent
	Err    *ParseError // valid for RecRejected
}
