package advice

import (
	"fmt"
	"math"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/telemetry/si"
)

// PlantKind says what sits on the capacitor node besides the ADC: nothing, a resistive
// load, or a buffer (a follower whose drop lies between the node and the sense point).
type PlantKind string

// Plant kinds, the same words as the summary's plant.kind.
const (
	PlantNone   PlantKind = "none"
	PlantLoad   PlantKind = "load"
	PlantBuffer PlantKind = "buffer"
)

// PlantInput is the one plant the advice designs for. The summary identifies it (kind,
// load, sense drop); `design` takes it from --load. Exactly one kind: a buffer's drop is
// never stacked on a load, and no load is invented when none is there.
type PlantInput struct {
	Kind       PlantKind
	LoadOhm    float64 // Kind load: the resistive load on the node, ohm
	LoadRatio  float64 // Kind load: load / R as identified (informative; 0 = unknown)
	SenseDropV float64 // Kind buffer: the drop between the node and the sense point, V
	// Kind buffer: LoadOhm, when > 0, is the buffer's own input loading on the node
	// (identified from the hold droop); 0 = a 10 kΩ emitter resistor with beta 100.
	Source string // where it came from: "identified from the capture", "given", ...
}

// PlantUsed is the plant the advice assumed, as shown in the output.
type PlantUsed struct {
	Kind       string  `json:"kind"`
	LoadOhm    float64 `json:"load_ohm"`
	SenseDropV float64 `json:"sense_drop_v"`
	Source     string  `json:"source"`
	Text       string  `json:"text"`
}

func (k PlantKind) valid() bool {
	return k == PlantNone || k == PlantLoad || k == PlantBuffer
}

// PlantOf reads the one plant from a summary. It stands in for the summary's own plant
// kind: where the present figures name both a load and a sense drop for the same shortfall
// of v_high, a drop in the range of a follower's base-emitter drop (0.3 to 1.2 V) is taken
// as a buffer, anything else as a load. With a buffer, a hold droop is the buffer's own
// input loading (kept as its LoadOhm), never a second load stacked on it.
func PlantOf(s *analysis.Summary) PlantInput {
	pl, b := s.Plant, s.Board
	src := "identified from the capture"
	buffer := pl.SenseDropV != nil && *pl.SenseDropV >= 0.3 && *pl.SenseDropV < 1.2
	load := pl.LoadOhm != nil && *pl.LoadOhm > 0
	holdShowsLoad := pl.TauHoldS != nil && pl.TauChargeS != nil && *pl.TauHoldS > *pl.TauChargeS
	switch {
	case load && buffer && holdShowsLoad:
		// A buffer's own input draws from the node as a load does: the hold droop is the
		// buffer's input loading, not a second part. One plant: the buffer, its input
		// loading taken from the droop.
		return PlantInput{Kind: PlantBuffer, SenseDropV: *pl.SenseDropV, LoadOhm: *pl.LoadOhm,
			Source: src + "; its input loading from the hold droop"}
	case buffer:
		return PlantInput{Kind: PlantBuffer, SenseDropV: *pl.SenseDropV, Source: src}
	case load:
		in := PlantInput{Kind: PlantLoad, LoadOhm: *pl.LoadOhm, Source: src}
		if b.ROhm != nil && *b.ROhm > 0 {
			in.LoadRatio = *pl.LoadOhm / *b.ROhm
		}
		return in
	case b.LoadOhm != nil && *b.LoadOhm > 0:
		return PlantInput{Kind: PlantLoad, LoadOhm: *b.LoadOhm, Source: "from the capture's meta lines"}
	}
	return PlantInput{Kind: PlantNone, Source: "the capture shows neither a load nor a buffer drop"}
}

// apply sets the plant's load and follower drop from the input, one kind only (see
// PlantInput), and records what was assumed.
func (in PlantInput) apply(p *plant) error {
	if !in.Kind.valid() {
		return fmt.Errorf("advice: plant kind must be none, load or buffer, got %q", in.Kind)
	}
	p.load, p.vbe = 0, 0
	switch in.Kind {
	case PlantLoad:
		if !(in.LoadOhm > 0) {
			return fmt.Errorf("advice: a load plant needs its load > 0, got %g", in.LoadOhm)
		}
		p.load = in.LoadOhm
		p.vbe = in.SenseDropV // non-zero only when the data showed both
	case PlantBuffer:
		if !(in.SenseDropV > 0) {
			return fmt.Errorf("advice: a buffer plant needs its sense drop > 0, got %g", in.SenseDropV)
		}
		p.vbe, p.bufLoad = in.SenseDropV, math.Max(in.LoadOhm, 0)
	}
	p.plantIn = in
	return nil
}

// used is the plant as the output states it.
func (p *plant) used() *PlantUsed {
	u := &PlantUsed{LoadOhm: p.load, SenseDropV: p.vbe, Source: p.plantIn.Source}
	switch {
	case p.load > 0 && p.vbe > 0:
		u.Kind = string(PlantLoad)
		u.Text = fmt.Sprintf("load %s and a buffer drop of %s (both shown by the data)", si.Format(p.load, "Ω"), fmtV(p.vbe))
	case p.load > 0:
		u.Kind = string(PlantLoad)
		u.Text = fmt.Sprintf("resistive load %s on the node, no buffer", si.Format(p.load, "Ω"))
	case p.vbe > 0:
		u.Kind = string(PlantBuffer)
		u.SenseDropV = p.vbe
		u.Text = fmt.Sprintf("buffer with a %s drop between the node and the ADC, no load", fmtV(p.vbe))
		if p.bufLoad > 0 {
			u.Text += fmt.Sprintf(" beside the buffer's own input (%s on the node)", si.Format(p.bufLoad, "Ω"))
		}
	default:
		u.Kind = string(PlantNone)
		u.Text = "no load and no buffer: the ADC reads the capacitor directly"
	}
	if u.Source == "" {
		u.Source = "given"
	}
	return u
}
