package report

import (
	"context"
	"fmt"
	"os"

	"quietband/detect"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
)

// RebuildOptions say what Rebuild draws.
type RebuildOptions struct {
	Log      string // the event log
	Captures string // the folder the log's capture names are relative to
	Out      string // the report folder
	All      bool   // draw every capture, not only those with events
	// Baseline is the baseline file the run that wrote the log started
	// from (read only; "": none).
	Baseline string
	// Note, when set, is told of each capture that is not redrawn, or is
	// drawn as it is now while the log says other data, and why.
	Note func(capture, note string)
}

// RebuildSummary counts what Rebuild did.
type RebuildSummary struct {
	Captures int // capture records in the log
	Analysed int // of them, status ok (the captures to read again)
	Drawn    int // captures drawn
	Missing  int // captures not found, unreadable or changed
}

// Rebuild makes the analyst's report from an event log: for every capture
// record, in log order, it reads the capture again under o.Captures, runs
// the same spectral pass to draw its pictures, and takes the events,
// statistics and satellites from the log. The baseline is relearned in
// the same order, so the pictures match what the log's run saw. Captures
// the log marks quarantined, or whose files are gone, are listed without
// pictures.
func Rebuild(ctx context.Context, o RebuildOptions) (RebuildSummary, error) {
	var sum RebuildSummary
	if _, err := os.Stat(o.Log); err != nil {
		return sum, err
	}
	state := detect.NewState()
	if o.Baseline != "" {
		b, err := baseline.Load(o.Baseline)
		if err != nil {
			return sum, err
		}
		state.Baselines = b
	}
	pipe := detect.NewPipeline(detect.Config{}, state)
	rep, err := New(o.Out, Options{All: o.All, Source: "event log " + o.Log})
	if err != nil {
		return sum, err
	}
	pending := map[string][]detect.Event{}
	err = eventlog.Scan(o.Log, func(r eventlog.Record) error {
		switch r.Kind {
		case eventlog.KindEvent:
			var e detect.Event
			if err := r.Decode(&e); err != nil {
				return err
			}
			pending[e.Capture] = append(pending[e.Capture], e)
			return nil
		case eventlog.KindCapture:
		default:
			return nil
		}
		var rec detect.CaptureRecord
		if err := r.Decode(&rec); err != nil {
			return err
		}
		sum.Captures++
		events := pending[rec.Capture]
		delete(pending, rec.Capture)
		c := Capture{Record: rec, Events: events}
		if rec.Status == detect.StatusOK {
			sum.Analysed++
			s, note, err := redraw(ctx, pipe, o.Captures, rec)
			if err != nil {
				return err
			}
			if note != "" {
				sum.Missing++
				if o.Note != nil {
					o.Note(rec.Capture, note)
				}
			}
			c.Summary, c.Note = s, note
			if s != nil && (len(events) > 0 || o.All) {
				sum.Drawn++
			}
		}
		return rep.Add(c)
	})
	if err != nil {
		return sum, err
	}
	return sum, rep.Close()
}

// redraw runs the spectral pass over the capture a record names and
// returns its summary, or a note saying why there is none (file gone or
// unreadable: not an error of the report).
func redraw(ctx context.Context, pipe *detect.Pipeline, root string, rec detect.CaptureRecord) (*Summary, string, error) {
	c, err := Reopen(root, rec)
	if err != nil {
		return nil, "not redrawn: " + err.Error(), nil
	}
	obs := NewObserver()
	// The satellites are the record's: the pictures need the spectral
	// pass only.
	var sats detect.SatelliteResult
	if rec.Stats != nil {
		sats = detect.SatelliteResult{Satellites: rec.Stats.Satellites, Skipped: rec.Stats.GNSSSkipped}
	}
	res, err := pipe.Process(ctx, c, rec.Capture, detect.WithObserver(obs),
		detect.WithSatellites(recordedSatellites{sats}, detect.SatellitesInPass))
	if err != nil {
		if ctx.Err() != nil {
			return nil, "", err
		}
		return nil, "not redrawn: " + err.Error(), nil
	}
	s := obs.Summary()
	if rec.SHA256 != "" && res.Record.SHA256 != rec.SHA256 {
		return s, fmt.Sprintf("data changed since the log was written (SHA-256 %.12s…, log says %.12s…); pictures show the file as it is now",
			res.Record.SHA256, rec.SHA256), nil
	}
	return s, "", nil
}

// recordedSatellites is a SatelliteMeter that measures nothing and gives
// back the satellites a capture record holds.
type recordedSatellites struct{ r detect.SatelliteResult }

func (m recordedSatellites) Start(string, float64, float64, bool) string { return m.r.Skipped }
func (recordedSatellites) Block(int64, []complex64)                      {}
func (m recordedSatellites) Measurement() detect.SatelliteResult         { return m.r }
