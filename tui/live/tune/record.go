package tune

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/caploop/caploop/analysis"
	"github.com/caploop/caploop/analysis/report"
	"github.com/caploop/caploop/telemetry/si"
)

// The files of a record folder besides the capture.
const (
	SummaryFile = "summary.json"
	ReportFile  = "report.html"
	HeaderFile  = "caploop_tune.h"
)

// Document is the summary JSON of a tune run: the run itself and the summaries of its
// passes and of the whole capture.
type Document struct {
	SchemaVersion int                `json:"schema_version"`
	Tune          *Result            `json:"tune"`
	Before        *analysis.Summary  `json:"before"`
	Identify      *analysis.Summary  `json:"identify"`
	After         *analysis.Summary  `json:"after"`
	Run           *report.SummaryDoc `json:"run"` // the whole capture, as `caploop summary` reads it
}

// WriteRecord writes the record folder's derived files for what the run reached: the
// summary JSON always, the HTML report when a pass was measured, the C header when the
// advice gave a deadband. whole is the summary of the whole capture (nil when there is
// none). It returns the names written.
func WriteRecord(dir string, res *Result, whole *analysis.Summary, now time.Time) ([]string, error) {
	var wrote []string
	doc := Document{SchemaVersion: 1, Tune: res, Before: res.Before, Identify: res.Identify, After: res.After}
	if whole != nil {
		doc.Run = &report.SummaryDoc{Summary: whole}
	}
	err := writeFile(filepath.Join(dir, SummaryFile), func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(doc)
	})
	if err != nil {
		return wrote, err
	}
	wrote = append(wrote, SummaryFile)
	var docs []report.Capture
	if res.Before != nil {
		docs = append(docs, report.Capture{Name: "before", Summary: res.Before})
	}
	if res.After != nil {
		docs = append(docs, report.Capture{Name: "after", Summary: res.After, Advice: res.Advice})
	} else if res.Identify != nil {
		docs = append(docs, report.Capture{Name: "identify", Summary: res.Identify, Advice: res.Advice})
	}
	if len(docs) > 0 {
		note := "caploop tune"
		if res.Compare != nil {
			note += ": " + res.Compare.Line
		}
		err := writeFile(filepath.Join(dir, ReportFile), func(w io.Writer) error {
			return report.WriteHTML(w, docs, report.Options{Title: "caploop tune: before and after", Note: note})
		})
		if err != nil {
			return wrote, err
		}
		wrote = append(wrote, ReportFile)
	}
	if res.Advice != nil && res.Advice.DeadbandCounts != nil {
		err := writeFile(filepath.Join(dir, HeaderFile), func(w io.Writer) error {
			_, err := io.WriteString(w, Header(res, now))
			return err
		})
		if err != nil {
			return wrote, err
		}
		wrote = append(wrote, HeaderFile)
	}
	return wrote, nil
}

// Header is the C header of constants a firmware build can include: the advised deadband,
// the sample period, the setpoint scale, and a comment with the identified plant, the
// declared parts and the date. Only numbers and caploop's own words go into it, in ASCII.
func Header(res *Result, now time.Time) string {
	b := res.Board
	var sb strings.Builder
	c := func(format string, a ...any) { fmt.Fprintf(&sb, " * "+format+"\n", a...) }
	sb.WriteString("/* caploop_tune.h: loop constants written by `caploop tune` on " + now.UTC().Format("2006-01-02") + ".\n")
	if p := res.Plant; p != nil {
		c("identified: %s", plantLine(p))
	}
	parts := []string{}
	add := func(name string, v *float64, unit string) {
		if v != nil {
			parts = append(parts, name+" "+si.Format(*v, unit))
		}
	}
	add("supply", b.SupplyV, "V")
	add("R", b.ROhm, "ohm")
	add("C", b.CF, "F")
	add("load", b.LoadOhm, "ohm")
	if len(parts) == 0 {
		parts = append(parts, "none declared")
	}
	c("declared parts: %s", strings.Join(parts, ", "))
	if res.Compare != nil {
		c("verified: %s", res.Compare.Line)
	} else {
		c("not verified on the board: build it in and run caploop tune again")
	}
	sb.WriteString(" */\n#ifndef CAPLOOP_TUNE_H\n#define CAPLOOP_TUNE_H\n\n")
	fmt.Fprintf(&sb, "/* three-state deadband half-width: hold while |pv - sp| <= this, ADC counts */\n#define CAPLOOP_DEADBAND_COUNTS %du\n\n", *res.Advice.DeadbandCounts)
	fmt.Fprintf(&sb, "/* sample period, microseconds */\n#define CAPLOOP_PERIOD_US %du\n\n", int(math.Round(b.PeriodS*1e6)))
	if a := res.Advice; a.SamplePeriod != nil && math.Abs(a.SamplePeriod.SuggestedS-b.PeriodS) > 1e-3*b.PeriodS {
		fmt.Fprintf(&sb, "/* the period the advice suggests (not applied unless --apply-period), microseconds */\n#define CAPLOOP_PERIOD_SUGGESTED_US %du\n\n", int(math.Round(a.SamplePeriod.SuggestedS*1e6)))
	}
	fmt.Fprintf(&sb, "/* ADC: %d bits, reference %d mV */\n#define CAPLOOP_ADC_BITS %du\n#define CAPLOOP_VREF_MV %du\n\n", b.ADCBits, int(math.Round(b.VrefV*1e3)), b.ADCBits, int(math.Round(b.VrefV*1e3)))
	sb.WriteString("/* setpoint scale: sp counts = millivolts * CAPLOOP_SP_COUNTS_PER_V / 1000 (2^bits codes over vref) */\n")
	fmt.Fprintf(&sb, "#define CAPLOOP_SP_COUNTS_PER_V %.6gf\n", math.Ldexp(1, b.ADCBits)/b.VrefV)
	sb.WriteString("#define CAPLOOP_SP_COUNTS(mv) ((unsigned)(((unsigned long)(mv) * (1ul << CAPLOOP_ADC_BITS) + CAPLOOP_VREF_MV / 2u) / CAPLOOP_VREF_MV))\n\n")
	sb.WriteString("#endif /* CAPLOOP_TUNE_H */\n")
	// Plain ASCII for any compiler: the SI prefix micro as u.
	return strings.ReplaceAll(strings.ReplaceAll(sb.String(), "µ", "u"), "Ω", "ohm")
}

func plantLine(p *PlantInfo) string {
	var parts []string
	tau := func(name string, v *float64, ci *[2]float64) {
		if v == nil {
			parts = append(parts, name+" not identified")
			return
		}
		s := name + " " + si.Format(*v, "s")
		if ci != nil {
			s += " (95 %: " + si.Format(ci[0], "s") + " to " + si.Format(ci[1], "s") + ")"
		}
		parts = append(parts, s)
	}
	tau("tau charge", p.TauChargeS, p.TauChargeCIS)
	tau("tau discharge", p.TauDischargeS, p.TauDischargeCIS)
	if p.LoadRatio != nil {
		parts = append(parts, fmt.Sprintf("load ratio R_load/R %.3g", *p.LoadRatio))
	} else {
		parts = append(parts, "load ratio not identified")
	}
	return strings.Join(parts, ", ")
}

// writeFile writes a derived file all or nothing (temp file, sync, rename); it refuses
// a path that is a symbolic link, a device, a FIFO or a folder.
func writeFile(path string, fn func(io.Writer) error) error {
	if fi, err := os.Lstat(path); err == nil && !fi.Mode().IsRegular() {
		return fmt.Errorf("tune: refusing to write %s: not a regular file", filepath.Base(path))
	} else if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("tune: %w", err)
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("tune: %w", err)
	}
	tmp := f.Name()
	err = fn(f)
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(tmp, 0o644)
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("tune: write %s: %w", filepath.Base(path), err)
	}
	return nil
}
