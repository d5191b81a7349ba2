package report

import (
	"fmt"
	"path/filepath"

	"quietband/detect"
	"quietband/ingest"
)

// RawSettings are the settings under which the analysis read the capture
// a record names, as the record states them: the file's format and rate,
// the centre, the start, the orientation the input set (spectrum) and,
// for real-valued samples, the IF and LO side (if_hz, lo_side). A SigMF recording's metadata gives its own; a raw
// file has nothing else to go by, and without the IF a real-valued one
// would be refused (or, read at another IF, drawn as another stream).
func RawSettings(rec detect.CaptureRecord) (ingest.RawSettings, error) {
	raw := ingest.RawSettings{SampleRate: rec.SampleRate}
	if rec.Format != "" {
		f, err := ingest.ParseFormat(rec.Format)
		if err != nil {
			return raw, fmt.Errorf("the record's format: %w", err)
		}
		raw.Format = f
	}
	if rec.CenterHz != nil {
		raw.CenterHz, raw.HasCenter = *rec.CenterHz, true
	}
	if rec.Start != nil {
		raw.Start = rec.Start.Time
	}
	if rec.IFHz != nil {
		raw.IFHz = *rec.IFHz
	}
	if rec.LOSide != "" {
		side, err := ingest.ParseLOSide(rec.LOSide)
		if err != nil {
			return raw, fmt.Errorf("the record's lo_side: %w", err)
		}
		raw.LOSide = side
	}
	// The orientation the input set: the pictures show the stream the
	// detectors saw, turned upright as they saw it.
	o, err := ingest.ParseOrientation(rec.Spectrum)
	if err != nil {
		return raw, fmt.Errorf("the record's spectrum: %w", err)
	}
	raw.Spectrum = o
	return raw, nil
}

// Reopen opens the capture a record names, under root, with the record's
// RawSettings, and checks that it reads as the stream the analysis saw:
// the file's rate, and the analysed rate (analysis_rate_hz, half the
// file's for real-valued samples turned into complex baseband), IF and LO
// side. A
// capture that opens as another stream is an error naming the file and
// what differs, so that no picture is drawn of samples the detectors did
// not see.
func Reopen(root string, rec detect.CaptureRecord) (*ingest.Capture, error) {
	path := filepath.Join(root, filepath.FromSlash(rec.Capture))
	raw, err := RawSettings(rec)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	c, err := ingest.Open(path, raw)
	if err != nil {
		if raw.Format.IsReal() && rec.IFHz == nil {
			return nil, fmt.Errorf("%w; the record states no if_hz (a log from before quietband recorded the IF)", err)
		}
		return nil, err
	}
	analysed := rec.SampleRate
	if rec.AnalysisRateHz != nil {
		analysed = *rec.AnalysisRateHz
	}
	var ifHz float64
	if rec.IFHz != nil {
		ifHz = *rec.IFHz
	}
	switch {
	case rec.SampleRate > 0 && c.FileSampleRate != rec.SampleRate:
		return nil, fmt.Errorf("%s: opens at %g samples/s, the record was analysed at a file rate of %g", path, c.FileSampleRate, rec.SampleRate)
	case analysed > 0 && c.SampleRate != analysed:
		return nil, fmt.Errorf("%s: opens as a %g samples/s stream, the record's analysis ran at %g", path, c.SampleRate, analysed)
	case c.IF.IFHz != ifHz:
		return nil, fmt.Errorf("%s: opens with an IF of %g Hz, the record's analysis used %g Hz", path, c.IF.IFHz, ifHz)
	case ifHz != 0 && c.IF.Side.String() != rec.LOSide:
		return nil, fmt.Errorf("%s: opens with the LO on the %s side, the record's analysis had it on the %q side", path, c.IF.Side, rec.LOSide)
	}
	return c, nil
}
