package report

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"quietband/detect"
)

// CSVColumns are the columns of the event CSV, in order; the package
// documentation describes each. Columns may be added at the end, never
// renamed, removed or reordered.
var CSVColumns = []string{
	"capture", "id", "episode", "class", "start", "end", "duration_s",
	"sample_start", "sample_count", "offset_hz", "center_hz", "bandwidth_hz",
	"freq_lower_hz", "freq_upper_hz", "jn_db", "power_dbfs", "cn0_loss_db",
	"detectors", "related", "params",
}

// CSVWriter writes events as CSV (RFC 4180 via encoding/csv), one row per
// event under a header row of CSVColumns.
type CSVWriter struct {
	w      *csv.Writer
	header bool
}

// NewCSVWriter returns a CSVWriter on w.
func NewCSVWriter(w io.Writer) *CSVWriter { return &CSVWriter{w: csv.NewWriter(w)} }

// Write writes the header (first time) and one row per event.
func (c *CSVWriter) Write(events []detect.Event) error {
	if !c.header {
		if err := c.w.Write(CSVColumns); err != nil {
			return err
		}
		c.header = true
	}
	for _, e := range events {
		if err := c.w.Write(CSVRow(e)); err != nil {
			return err
		}
	}
	return c.w.Error()
}

// Flush writes the header if nothing was written yet, flushes and reports
// any write error.
func (c *CSVWriter) Flush() error {
	if !c.header {
		if err := c.w.Write(CSVColumns); err != nil {
			return err
		}
		c.header = true
	}
	c.w.Flush()
	return c.w.Error()
}

// CSVRow is the CSV row of one event, aligned with CSVColumns.
func CSVRow(e detect.Event) []string {
	num := func(v float64) string {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return ""
		}
		return strconv.FormatFloat(v, 'f', -1, 64) // full precision, plain notation (no 1.5e+09)
	}
	when := func(t detect.Time) string {
		if t.IsZero() {
			return ""
		}
		return t.UTC().Format(detect.TimeLayout)
	}
	dur := ""
	if !e.Start.IsZero() && !e.End.IsZero() {
		dur = num(e.End.Sub(e.Start.Time).Seconds())
	}
	center, lower, upper := "", "", ""
	if e.CenterHz != nil {
		center = num(*e.CenterHz)
		lower, upper = num(*e.CenterHz-e.BandwidthHz/2), num(*e.CenterHz+e.BandwidthHz/2)
	}
	loss := ""
	if l, ok := Loss(e); ok {
		loss = num(l)
	}
	jn := ""
	if v, ok := JN(e); ok {
		jn = num(v)
	}
	params, err := json.Marshal(e.Params)
	if err != nil {
		panic(fmt.Sprintf("report: marshal of event params: %v", err))
	}
	return []string{
		e.Capture, e.ID, e.Episode, e.Class, when(e.Start), when(e.End), dur,
		strconv.FormatInt(e.SampleStart, 10), strconv.FormatInt(e.SampleCount, 10),
		num(e.OffsetHz), center, num(e.BandwidthHz), lower, upper,
		jn, num(e.PowerDBFS), loss,
		strings.Join(e.Detectors, " "), strings.Join(e.Related, " "), string(params),
	}
}

// FreqEdges are the event's absolute lower and upper band edges in a
// capture centred at centerHz: centre + offset ∓ bandwidth/2.
func FreqEdges(e detect.Event, centerHz float64) (lo, hi float64) {
	c := centerHz + e.OffsetHz
	return c - e.BandwidthHz/2, c + e.BandwidthHz/2
}
