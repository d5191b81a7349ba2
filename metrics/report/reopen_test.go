package report

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"quietband/detect"
	"quietband/ingest"
)

// realIF is the real-valued IF recording of testdata/realdata (BSD
// 2-clause licence beside it) and the settings its README gives: ri8 at
// 12 MS/s, IF 3 MHz, low-side LO, band centre 1575.42 MHz.
var (
	realIFRoot = filepath.Join("..", "..", "testdata", "realdata")
	realIFName = "L1_20211125_004000_12MHz_I.bin"
	realIFRaw  = ingest.RawSettings{Format: ingest.RI8, SampleRate: 12e6, CenterHz: 1575.42e6, HasCenter: true,
		IFHz: 3e6, LOSide: ingest.LowSide}
)

// analyse runs the spectral pass over c with an Observer and returns the
// record and the summary the pictures are drawn from.
func analyse(t *testing.T, c *ingest.Capture) (detect.CaptureRecord, *Summary) {
	t.Helper()
	pipe := detect.NewPipeline(detect.Config{}, nil)
	o := NewObserver()
	res, err := pipe.Process(context.Background(), c, realIFName, detect.WithObserver(o))
	if err != nil {
		t.Fatal(err)
	}
	return res.Record, o.Summary()
}

// TestReopenRealIF: a raw real-IF capture is reopened from its record as
// the analysis read it: complex baseband at half the file's rate (6 MS/s,
// REFERENCES §12.1: mixed by −IF, half-band filtered, decimated by 2),
// 600 000 samples from 1 200 000 real ones, centred at 1575.42 MHz, and
// the spectral pass over it gives the record's SHA-256 and the very
// summary (spectrogram, PSD, SK, envelope) the analysis drew. A record
// without its IF (as from an older log), or one whose analysis rate is
// not what the file opens as, is refused with the file and the problem
// named.
func TestReopenRealIF(t *testing.T) {
	c, err := ingest.Open(filepath.Join(realIFRoot, realIFName), realIFRaw)
	if err != nil {
		t.Fatal(err)
	}
	rec, want := analyse(t, c)
	if rec.IFHz == nil || rec.LOSide != "low" || rec.AnalysisRateHz == nil {
		t.Fatalf("the record lacks the IF conversion: if_hz %v, lo_side %q, analysis_rate_hz %v", rec.IFHz, rec.LOSide, rec.AnalysisRateHz)
	}
	again, err := Reopen(realIFRoot, rec)
	if err != nil {
		t.Fatal(err)
	}
	center, has := again.CenterHz()
	if again.SampleRate != 6e6 || again.Decimation != 2 || again.Samples != 600000 || !has || center != 1575.42e6 {
		t.Errorf("reopened as %g S/s, decimation %d, %d samples, centre %g (%v); want 6e6, 2, 600000, 1575.42e6",
			again.SampleRate, again.Decimation, again.Samples, center, has)
	}
	rec2, got := analyse(t, again)
	if rec2.SHA256 != rec.SHA256 {
		t.Errorf("SHA-256 %s, the record's %s", rec2.SHA256, rec.SHA256)
	}
	// %v prints every float64 in its shortest exact form, NaN (rows no
	// frame reached) included.
	if fmt.Sprintf("%v", *got) != fmt.Sprintf("%v", *want) {
		t.Error("the reopened capture's summary differs from the analysis's")
	}
	if got.SampleRate != 6e6 || got.Samples != 600000 {
		t.Errorf("summary of %g S/s, %d samples; want the analysed 6e6, 600000", got.SampleRate, got.Samples)
	}

	path := filepath.Join(realIFRoot, realIFName)
	for _, tc := range []struct {
		name string
		edit func(r *detect.CaptureRecord)
		want []string
	}{
		{"no IF", func(r *detect.CaptureRecord) { r.IFHz, r.LOSide = nil, "" }, []string{path, "--if"}},
		{"another analysis rate", func(r *detect.CaptureRecord) { v := 12e6; r.AnalysisRateHz = &v }, []string{path, "6e+06 samples/s", "1.2e+07"}},
		{"bad LO side", func(r *detect.CaptureRecord) { r.LOSide = "middle" }, []string{path, "lo_side", "middle"}},
	} {
		r := rec
		tc.edit(&r)
		_, err := Reopen(realIFRoot, r)
		if err == nil {
			t.Errorf("%s: reopened", tc.name)
			continue
		}
		for _, w := range tc.want {
			if !strings.Contains(err.Error(), w) {
				t.Errorf("%s: error %q does not name %q", tc.name, err, w)
			}
		}
	}
}
