package analysis

// Options tune the accumulator. The zero value picks the defaults.
type Options struct {
	// Source names the capture in the Summary (a file name, a port path).
	Source string
	// MaxSegments bounds the listed segments and steps (0 = 4096). Later ones are
	// counted in SegmentsOmitted and StepsOmitted.
	MaxSegments int
	// Window is the number of steady readings per segment kept for the spectrum, the
	// drive pattern's exact repeat and the node ripple (0 = 512: patterns up to 256
	// samples repeat twice in it; a larger window costs more at each segment's end, one
	// FFT of twice its length).
	Window int
	// MarginCounts is the extra room, in counts, beyond one expected step and 4 sigma of
	// noise, that the reading before a sample pair must keep from the controller's
	// switching threshold for the pair to enter the plant fit (0 = 2): readings near a
	// threshold chose their drive partly by noise, which biases the fit.
	MarginCounts float64
	// TraceBuckets is the length of the overview trace (0 = 1024).
	TraceBuckets int
	// ConversionS is the ADC conversion time the sample period is compared with
	// (0 = 104 µs: 13 ADC clocks at 125 kHz for a 10-bit successive-approximation ADC,
	// classic 8-bit microcontroller datasheets, from memory).
	ConversionS float64
	// TrackSamples and TrackStepCounts set the tracking rule (see Tracking): a setpoint
	// change of at most TrackStepCounts counts (0 = 16) less than TrackSamples samples
	// (0 = 32) after the previous one is a tracking move, and the TrackSamples samples
	// from it on are tracking samples.
	TrackSamples    int
	TrackStepCounts float64
	// SupplyTol is the relative tolerance of the supply (0 = DefaultSupplyTol, 5 %): a
	// load or a drop seen only in v_high must exceed it to be reported.
	SupplyTol float64
}

func (o Options) withDefaults() Options {
	if o.MaxSegments <= 0 {
		o.MaxSegments = 4096
	}
	if o.Window <= 0 {
		o.Window = 512
	}
	if o.MarginCounts <= 0 {
		o.MarginCounts = 2
	}
	if o.TraceBuckets <= 0 {
		o.TraceBuckets = 1024
	}
	if o.TraceBuckets%2 == 1 {
		o.TraceBuckets++
	}
	if o.ConversionS <= 0 {
		o.ConversionS = 104e-6
	}
	if o.TrackSamples <= 0 {
		o.TrackSamples = 32
	}
	if o.TrackStepCounts <= 0 {
		o.TrackStepCounts = 16
	}
	if o.SupplyTol <= 0 {
		o.SupplyTol = DefaultSupplyTol
	}
	return o
}

// Kept traces: at most this many zoom windows, of this many samples, and step traces.
const (
	maxZooms      = 64
	zoomLen       = 256
	maxStepTraces = 16
)
