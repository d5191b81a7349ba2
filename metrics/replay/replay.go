// Package replay analyses archived captures the way the daemon analyses
// new ones, and holds the one step both take for each capture: Analyse,
// from a capture found (ingest.Found) to its event-log records, the
// pipeline's events and capture record, or a quarantine record with the
// reason.
//
// Run finds the captures under the paths given (Collect), orders them by
// start time, then name, and analyses them in that order with one
// pipeline, whose site baselines learn from each clean capture for the
// next. Each capture's satellites are measured while its spectral pass
// runs, never ahead of it: what the meter learns from one capture (the
// site's clock offset, the spectrum orientation) shapes the next one's
// measurement, so the captures of a site are measured in time order.
// Where the meter runs depends on the number of workers (Placement); it
// is given the same blocks in the same order either way, so the records
// are byte for byte the same for any number of workers.
//
// It sits with the event log it writes (metrics/eventlog); cmd/quietband
// wires it to the command line, prints its table and summary, and hands
// its captures to the analyst's report (metrics/report).
package replay

import (
	"context"
	"errors"
	"os"
	"sort"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
)

// Outcome is what the analysis of one capture gives: its events and its
// capture record, in the order the event log takes them (Items).
type Outcome struct {
	Events []detect.Event
	Record detect.CaptureRecord
	// Result is the pipeline's whole result (nil when quarantined).
	Result *detect.Result
	// Err says why the capture was quarantined (the reason in Record);
	// nil when it was analysed.
	Err error
}

// Items are the outcome's event-log records: its events, then its
// capture record.
func (o Outcome) Items() []eventlog.Item {
	items := make([]eventlog.Item, 0, len(o.Events)+1)
	for _, e := range o.Events {
		items = append(items, eventlog.Item{Kind: eventlog.KindEvent, Body: e})
	}
	return append(items, eventlog.Item{Kind: eventlog.KindCapture, Body: o.Record})
}

// Analyse analyses one capture found and opened (Collect and the daemon's
// Watcher hand captures out opened) with pipe: its events and capture
// record, or, when it has a problem or its analysis fails, a capture
// record quarantining it with the reason. The error is ctx's, when ctx
// ended during the analysis (nothing is recorded then).
func Analyse(ctx context.Context, pipe *detect.Pipeline, f ingest.Found, opts ...detect.Option) (Outcome, error) {
	if f.Problem != nil {
		rec := Quarantined(f.Name, f.Problem)
		rec.Input = f.Input
		return Outcome{Record: rec, Err: f.Problem}, nil
	}
	if f.Input != "" {
		opts = append(opts[:len(opts):len(opts)], detect.WithInput(f.Input))
	}
	res, err := pipe.Process(ctx, f.Capture, f.Name, opts...)
	switch {
	case ctx.Err() != nil:
		return Outcome{}, ctx.Err()
	case err != nil:
		rec := Quarantined(f.Name, err)
		rec.Input = f.Input
		rec.MetadataSHA256 = MetadataSHA256(f)
		return Outcome{Record: rec, Err: err}, nil
	}
	if f.Capture.TimeProblem != "" {
		res.Record.Notes = append(res.Record.Notes, f.Capture.TimeProblem)
	}
	return Outcome{Events: res.Events, Record: res.Record, Result: res}, nil
}

// MetadataSHA256 is the ReadingSHA256 of an opened SigMF capture's
// metadata (ingest.Meta), "" for a raw file or a capture not opened.
func MetadataSHA256(f ingest.Found) string {
	if f.Capture == nil {
		return ""
	}
	return f.Capture.MetadataSHA256()
}

// Quarantined is the capture record of a capture that cannot be analysed:
// its name, status quarantined and the reason (an ingest.CaptureError's
// own message, which names the file and the problem, when err holds one).
func Quarantined(name string, err error) detect.CaptureRecord {
	msg := err.Error()
	var ce *ingest.CaptureError
	if errors.As(err, &ce) {
		msg = ce.Error()
	}
	return detect.CaptureRecord{Capture: name, Status: detect.StatusQuarantined, Error: msg}
}

// Collect finds the captures under paths (files or folders, recursively:
// ingest.FindRaw), opens them (a failure becomes the capture's Problem)
// and orders them by start time, then name. A capture's name is its path
// relative to the folder given, or to a named file's folder.
func Collect(paths []string, raw ingest.RawSettings) ([]ingest.Found, error) {
	var all []ingest.Found
	for _, root := range paths {
		found, err := ingest.FindRaw(raw, root)
		if err != nil {
			return nil, err
		}
		for i := range found {
			found[i].Open(raw)
		}
		all = append(all, found...)
	}
	start := func(f ingest.Found) time.Time {
		if f.Capture == nil {
			return time.Time{}
		}
		return f.Capture.Start()
	}
	sort.SliceStable(all, func(a, b int) bool {
		if sa, sb := start(all[a]), start(all[b]); !sa.Equal(sb) {
			return sa.Before(sb)
		}
		return all[a].Name < all[b].Name
	})
	return all, nil
}

// Placement is where a replay with the given number of workers measures
// the satellites: inside the spectral pass with one, on a read of their
// own beside it with more (a second read and decode of each capture, in
// exchange for two goroutines that share nothing). Measured on two CPUs
// (BenchmarkReplayModes -cpu 2, 10 MS/s ci16_le, eight satellites, ms per
// 1 s capture): see the README's Measurements.
func Placement(workers int) detect.SatellitePlacement {
	if workers <= 1 {
		return detect.SatellitesInPass
	}
	return detect.SatellitesOwnRead
}

// Options are what a replay takes.
type Options struct {
	Paths []string
	Raw   ingest.RawSettings // for raw files
	// Baseline is a baseline file: loaded when it exists, saved at the
	// end ("": none).
	Baseline string
	// Workers is the number of CPUs to analyse with (Placement); the
	// records do not depend on it.
	Workers int
	// ClockRangeHz is the satellite search's receiver clock range,
	// detect.Config.ClockRangeHz (0: the default).
	ClockRangeHz float64
	// Log, when set, takes each capture's records, one batch a capture;
	// a capture it already holds (Recorded) is not written again.
	Log *eventlog.Log
	// AlreadyRecorded, when set, is told of each capture that Log already
	// holds (nothing is written for it).
	AlreadyRecorded func(ingest.Found, Outcome)
	// Observer, when set, gives the block observer of each capture about
	// to be analysed (nil: none), for pictures.
	Observer func(ingest.Found) detect.BlockObserver
	// Progress, when set, is told of each capture before its analysis:
	// i of n.
	Progress func(i, n int, f ingest.Found)
	// Done, when set, takes each capture's outcome, in order, once it is
	// in the log.
	Done func(ingest.Found, Outcome) error
}

// Summary is what a replay found.
type Summary struct {
	Captures, Bad int // captures, and those quarantined
	// AlreadyRecorded counts the captures the log already held: nothing
	// was written for them.
	AlreadyRecorded int
	Events          []detect.Event // every event, in order
	ByClass         map[string]int // events by class
	Samples         int64          // complex samples analysed
	Signal          time.Duration  // capture time analysed
	Busy            time.Duration  // wall-clock time of the analysis alone (not the log's appends, nor what Done draws or writes)
}

// Run analyses every capture under o.Paths, in order (see the package
// documentation), with the daemon's default detection settings and a
// satellite meter, and returns what it found. A capture that cannot be
// analysed is recorded as quarantined and the replay goes on; an error
// ends it (a path that cannot be walked, the log or the baseline file
// failing, a Done error).
func Run(ctx context.Context, o Options) (*Summary, error) {
	found, err := Collect(o.Paths, o.Raw)
	if err != nil {
		return nil, err
	}
	state := detect.NewState()
	if o.Baseline != "" {
		b, err := baseline.Load(o.Baseline)
		switch {
		case err == nil:
			state.Baselines = b
		case !errors.Is(err, os.ErrNotExist):
			return nil, err
		}
	}
	var recorded Recorded
	if o.Log != nil {
		if recorded, err = RecordedIn(o.Log.Path()); err != nil {
			return nil, err
		}
	}
	cfg := detect.Config{ClockRangeHz: o.ClockRangeHz}
	pipe := detect.NewPipeline(cfg, state)
	// One meter for every input: it keeps what it learns apart per
	// baseline key.
	pipe.GNSS = detect.NewGNSSMeter(cfg)
	pipe.SatellitePlacement = Placement(o.Workers)

	sum := &Summary{ByClass: map[string]int{}}
	for i, f := range found {
		if o.Progress != nil {
			o.Progress(i, len(found), f)
		}
		sum.Captures++
		var opts []detect.Option
		if o.Observer != nil && f.Problem == nil {
			if obs := o.Observer(f); obs != nil {
				opts = append(opts, detect.WithObserver(obs))
			}
		}
		t0 := time.Now()
		out, err := Analyse(ctx, pipe, f, opts...)
		sum.Busy += time.Since(t0)
		if err != nil {
			return nil, err
		}
		if out.Err != nil {
			sum.Bad++
		} else {
			for _, e := range out.Events {
				sum.ByClass[e.Class]++
			}
			sum.Events = append(sum.Events, out.Events...)
			sum.Samples += f.Capture.Samples
			sum.Signal += f.Capture.Duration()
		}
		switch {
		case o.Log == nil:
		case recorded.Has(out.Record):
			sum.AlreadyRecorded++
			if o.AlreadyRecorded != nil {
				o.AlreadyRecorded(f, out)
			}
		default:
			if _, err := o.Log.AppendBatch(out.Items()); err != nil {
				return nil, err
			}
			recorded.Add(out.Record)
		}
		if o.Done != nil {
			if err := o.Done(f, out); err != nil {
				return nil, err
			}
		}
	}
	if o.Baseline != "" {
		if err := baseline.Save(o.Baseline, state.Baselines); err != nil {
			return nil, err
		}
	}
	return sum, nil
}
