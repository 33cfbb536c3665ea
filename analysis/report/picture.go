package report

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// WritePicture writes a single overview picture of docs in format "svg" or "png": the
// setpoint and measurement of each capture, one row each, and a bottom row with the
// steady ripple (overlaid when there are several captures), the error histogram and the
// ripple spectrum of the first capture.
func WritePicture(w io.Writer, docs []Capture, format string) error {
	format = strings.ToLower(format)
	if format != "svg" && format != "png" {
		return fmt.Errorf("report: picture format %q: want svg or png", format)
	}
	if len(docs) == 0 {
		return ErrNoDocs
	}
	var rows []chart
	for _, d := range docs {
		if d.Summary == nil {
			continue
		}
		if c, ok := overviewChart(d.Summary, clean(d.Name)+": setpoint and measurement"); ok {
			rows = append(rows, c)
		}
	}
	var bottom []chart
	if len(docs) > 1 {
		if c, ok := rippleChart(docs); ok {
			bottom = append(bottom, c)
		}
	} else if z, ok := steadyZoom(docs[0].Summary); ok {
		if c, ok := zoomChart(docs[0].Summary, z); ok {
			bottom = append(bottom, c)
		}
	}
	if s := docs[0].Summary; s != nil {
		if c, ok := histogramChart(s); ok {
			bottom = append(bottom, c)
		}
		if c, ok := spectrumChart(s); ok {
			bottom = append(bottom, c)
		}
	}
	if len(rows) == 0 && len(bottom) == 0 {
		return fmt.Errorf("report: nothing to draw: the captures kept no waveforms")
	}
	nrows := len(rows)
	if len(bottom) > 0 {
		nrows++
	}
	width := 30 * vg.Centimeter
	rowH := 10 * vg.Centimeter
	cv, err := draw.NewFormattedCanvas(width, rowH*vg.Length(nrows), format)
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	dc := draw.New(cv)
	tiles := draw.Tiles{Rows: nrows, Cols: 1, PadY: vg.Millimeter * 3, PadTop: vg.Millimeter * 2, PadBottom: vg.Millimeter * 2, PadLeft: vg.Millimeter * 2, PadRight: vg.Millimeter * 2}
	for i, c := range rows {
		c.draw(tiles.At(dc, 0, i))
	}
	if len(bottom) > 0 {
		rc := tiles.At(dc, 0, nrows-1)
		bt := draw.Tiles{Rows: 1, Cols: len(bottom), PadX: vg.Millimeter * 4}
		for j, c := range bottom {
			c.draw(bt.At(rc, j, 0))
		}
	}
	bw := bufio.NewWriter(w)
	if _, err := cv.WriteTo(bw); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}
