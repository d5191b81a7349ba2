package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
	"quietband/metrics/report"
)

func init() {
	register("report", "rebuild the analyst's report (pictures, HTML) from an event log and its captures", runReport)
}

// analystOut is what replay writes for analysts besides the log: the HTML
// report, the event CSV and SigMF annotations.
type analystOut struct {
	rep      *report.Report
	csv      *report.CSVWriter
	csvFile  *os.File
	csvPath  string
	annotate bool
	inPlace  bool
	annDir   string
	obs      *report.Observer
	cmd      string
	errOut   io.Writer
}

// newAnalystOut prepares the outputs the options ask for (nil: none).
func newAnalystOut(o replayOptions, cmd, source string) (*analystOut, error) {
	if o.inPlace && !o.annotate {
		return nil, errors.New("--in-place rewrites the captures' metadata with annotations: it goes with --annotate")
	}
	if o.annotate && !o.inPlace && o.reportDir == "" {
		return nil, errors.New("--annotate writes annotated copies of the metadata into the --report folder: give --report DIR, or --in-place to annotate the captures themselves")
	}
	if o.reportAll && o.reportDir == "" {
		return nil, errors.New("--report-all goes with --report DIR")
	}
	if o.reportDir == "" && o.csvPath == "" && !o.annotate {
		return nil, nil
	}
	a := &analystOut{annotate: o.annotate, inPlace: o.inPlace, cmd: cmd, errOut: o.errOut, csvPath: o.csvPath}
	if o.reportDir != "" {
		rep, err := report.New(o.reportDir, report.Options{All: o.reportAll, Source: source})
		if err != nil {
			return nil, err
		}
		a.rep = rep
		a.annDir = filepath.Join(o.reportDir, "annotations")
	}
	if o.csvPath != "" {
		f, err := os.Create(o.csvPath)
		if err != nil {
			return nil, err
		}
		a.csvFile, a.csv = f, report.NewCSVWriter(f)
	}
	return a, nil
}

// observer returns a fresh observer for the next capture (nil when no
// pictures are drawn).
func (a *analystOut) observer() detect.BlockObserver {
	if a == nil || a.rep == nil {
		return nil
	}
	a.obs = report.NewObserver()
	return a.obs
}

// done takes the outcome of one capture: the records replay logged for it
// (its events, then its capture record).
func (a *analystOut) done(j job, items []eventlog.Item) error {
	if a == nil || len(items) == 0 {
		return nil
	}
	rec, ok := items[len(items)-1].Body.(detect.CaptureRecord)
	if !ok {
		panic("quietband: the last record of a capture is not its capture record")
	}
	var events []detect.Event
	for _, it := range items[:len(items)-1] {
		events = append(events, it.Body.(detect.Event))
	}
	analysed := rec.Status == detect.StatusOK
	var sum *report.Summary
	if a.obs != nil && analysed {
		sum = a.obs.Summary()
	}
	a.obs = nil
	if a.rep != nil {
		if err := a.rep.Add(report.Capture{Record: rec, Events: events, Summary: sum}); err != nil {
			return err
		}
	}
	if a.csv != nil {
		if err := a.csv.Write(events); err != nil {
			return fmt.Errorf("%s: %w", a.csvPath, err)
		}
	}
	if a.annotate && analysed {
		if err := a.annotateCapture(j, events); err != nil {
			return err
		}
	}
	return nil
}

// annotateCapture writes the capture's events as SigMF annotations: in
// place, or into a copy under the report's annotations folder.
func (a *analystOut) annotateCapture(j job, events []detect.Event) error {
	c := j.capture
	if c.MetaPath == "" {
		if len(events) > 0 {
			fmt.Fprintf(a.errOut, "quietband %s: %s is a raw capture: no SigMF metadata, %d event(s) not annotated\n", a.cmd, j.name, len(events))
		}
		return nil
	}
	if a.inPlace {
		if _, err := report.AnnotateFile(c, c.MetaPath, events); err != nil {
			return err
		}
		return nil
	}
	if len(events) == 0 {
		return nil
	}
	rel := filepath.FromSlash(j.name)
	if filepath.IsAbs(rel) || rel == ".." || strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
		rel = filepath.Base(rel)
	}
	rel = strings.TrimSuffix(strings.TrimSuffix(rel, ingest.MetaExt), ingest.DataExt) + ingest.MetaExt
	dst := filepath.Join(a.annDir, rel)
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return err
	}
	_, err := report.AnnotateFile(c, dst, events)
	return err
}

// close finishes the outputs and says where they are on errOut.
func (a *analystOut) close() error {
	if a == nil {
		return nil
	}
	var errs []error
	if a.csv != nil {
		if err := a.csv.Flush(); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", a.csvPath, err))
		}
		if err := a.csvFile.Sync(); err != nil {
			errs = append(errs, err)
		}
		if err := a.csvFile.Close(); err != nil {
			errs = append(errs, err)
		}
	}
	if a.rep != nil {
		if err := a.rep.Close(); err != nil {
			errs = append(errs, err)
		} else {
			fmt.Fprintf(a.errOut, "quietband %s: report written to %s\n", a.cmd, filepath.Join(a.rep.Dir(), "index.html"))
		}
	}
	return errors.Join(errs...)
}

func runReport(args []string, out, errOut io.Writer) error {
	fs := newFlags("report", "LOG", `
Rebuilds the analyst's report from an event log: for every capture record,
in log order, it reads the capture again under --captures (the root the
log's capture names are relative to), runs the same spectral pass to draw
its pictures, and takes the events, statistics and satellites from the log.
The baseline is relearned in the same order, so the pictures match what the
log's run saw. Captures the log marks quarantined, or whose files are gone,
are listed without pictures. Writes index.html and the PNG pictures into
--out.`, errOut)
	root := fs.String("captures", ".", "folder the log's capture names are relative to")
	outDir := fs.String("out", "report", "folder to write the report into (created if missing)")
	all := fs.Bool("all", false, "draw pictures for every capture, not only those with events")
	baseline := fs.String("baseline", "", "baseline file to start from (read only), as given to the run that wrote the log")
	// Flags may come before or after LOG.
	var pos []string
	rest := args
	for {
		if err := parseFlags(fs, rest); err != nil {
			return err
		}
		if fs.NArg() == 0 {
			break
		}
		pos = append(pos, fs.Arg(0))
		rest = fs.Args()[1:]
	}
	if len(pos) != 1 {
		fs.Usage()
		return errUsage
	}
	return rebuildReport(context.Background(), pos[0], *root, *outDir, *all, *baseline, out, errOut)
}

// rebuildReport is the report subcommand's work.
func rebuildReport(ctx context.Context, logPath, root, outDir string, all bool, baselinePath string, out, errOut io.Writer) error {
	if _, err := os.Stat(logPath); err != nil {
		return err
	}
	state := detect.NewState()
	if baselinePath != "" {
		b, err := baseline.Load(baselinePath)
		if err != nil {
			return err
		}
		state.Baselines = b
	}
	pipe := detect.NewPipeline(detect.Config{}, state)
	rep, err := report.New(outDir, report.Options{All: all, Source: "event log " + logPath})
	if err != nil {
		return err
	}
	pending := map[string][]detect.Event{}
	var captures, drawn, missing int
	err = eventlog.Scan(logPath, func(r eventlog.Record) error {
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
		captures++
		events := pending[rec.Capture]
		delete(pending, rec.Capture)
		c := report.Capture{Record: rec, Events: events}
		if rec.Status == detect.StatusOK {
			sum, note, err := redraw(ctx, pipe, root, rec)
			if err != nil {
				return err
			}
			if note != "" {
				missing++
				fmt.Fprintf(errOut, "quietband report: %s: %s\n", rec.Capture, note)
			}
			c.Summary, c.Note = sum, note
			if sum != nil && (len(events) > 0 || all) {
				drawn++
			}
		}
		return rep.Add(c)
	})
	if err != nil {
		return err
	}
	if err := rep.Close(); err != nil {
		return err
	}
	fmt.Fprintf(out, "%d capture(s) from %s, %d drawn, %d not found or changed; report: %s\n",
		captures, logPath, drawn, missing, filepath.Join(outDir, "index.html"))
	return nil
}

// redraw runs the spectral pass over the capture a record names and
// returns its summary, or a note saying why there is none (file gone or
// unreadable: not an error of the report).
func redraw(ctx context.Context, pipe *detect.Pipeline, root string, rec detect.CaptureRecord) (*report.Summary, string, error) {
	c, err := report.Reopen(root, rec)
	if err != nil {
		return nil, "not redrawn: " + err.Error(), nil
	}
	obs := report.NewObserver()
	pipe.Observer = obs
	// The satellites are the record's: the pictures need the spectral
	// pass only.
	var sats detect.SatelliteResult
	if rec.Stats != nil {
		sats = detect.SatelliteResult{Satellites: rec.Stats.Satellites, Skipped: rec.Stats.GNSSSkipped}
	}
	pipe.GNSS, pipe.SatellitePlacement = recordedSatellites{sats}, detect.SatellitesInPass
	defer func() { pipe.Observer, pipe.GNSS = nil, nil }()
	res, err := pipe.Process(ctx, c, rec.Capture)
	if err != nil {
		if ctx.Err() != nil {
			return nil, "", err
		}
		return nil, "not redrawn: " + err.Error(), nil
	}
	sum := obs.Summary()
	if rec.SHA256 != "" && res.Record.SHA256 != rec.SHA256 {
		return sum, fmt.Sprintf("data changed since the log was written (SHA-256 %.12s…, log says %.12s…); pictures show the file as it is now",
			res.Record.SHA256, rec.SHA256), nil
	}
	return sum, "", nil
}

// recordedSatellites is a SatelliteMeter that measures nothing and gives
// back the satellites a capture record holds.
type recordedSatellites struct{ r detect.SatelliteResult }

func (m recordedSatellites) Start(string, float64, float64, bool) string { return m.r.Skipped }
func (recordedSatellites) Block(int64, []complex64)                      {}
func (m recordedSatellites) Measurement() detect.SatelliteResult         { return m.r }
