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

// PlantOf reads the one plant the summary identified (Summary.Model): a load, a buffer
// or neither, never a buffer drop stacked on a load. With a buffer, a hold droop is the
// buffer's own input loading (kept as its LoadOhm).
func PlantOf(s *analysis.Summary) PlantInput {
	m := s.Model()
	src := "identified from the capture"
	if !m.Identified {
		src = "from the capture's meta lines"
	}
	switch m.Kind {
	case analysis.KindBuffer:
		in := PlantInput{Kind: PlantBuffer, SenseDropV: m.SenseDropV, Source: src}
		if m.Rough {
			in.Source += " (the drop's central value: its interval is wider than 10 %)"
		}
		if !(m.SenseDropV > 0) {
			// A buffer whose drop the data leave unknown: the advice cannot design the
			// drop in, and does not invent one.
			return PlantInput{Kind: PlantNone, Source: "a buffer whose drop the data do not show; none assumed"}
		}
		if m.LoadOhm > 0 {
			in.LoadOhm = m.LoadOhm
			in.Source += "; its input loading from the hold droop"
		}
		return in
	case analysis.KindLoad:
		if m.LoadOhm > 0 {
			if m.Rough {
				src += " (the load's central value: its interval is wider than ±10 %)"
			}
			return PlantInput{Kind: PlantLoad, LoadOhm: m.LoadOhm, LoadRatio: m.LoadRatio, Source: src}
		}
	}
	if m.Kind == "" && m.LoadOhm > 0 {
		return PlantInput{Kind: PlantLoad, LoadOhm: m.LoadOhm, LoadRatio: m.LoadRatio, Source: "from the capture's meta lines (the data cannot tell load from buffer)"}
	}
	if m.Kind == "" {
		return PlantInput{Kind: PlantNone, Source: "the data cannot tell a load or a buffer; none assumed"}
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
