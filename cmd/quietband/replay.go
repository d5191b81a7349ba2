package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strings"
	"text/tabwriter"
	"time"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/baseline"
	"quietband/metrics/eventlog"
	"quietband/metrics/report"
)

func init() {
	register("replay", "analyse archived captures: event table, JSON records, event log", runReplay)
}

// replayOptions are what replay and demo share.
type replayOptions struct {
	paths    []string
	raw      ingest.RawSettings
	logPath  string
	json     bool
	baseline string
	progress bool
	workers  int
	out      io.Writer
	errOut   io.Writer
	// analysts' outputs (report.go)
	reportDir         string
	reportAll         bool
	annotate, inPlace bool
	csvPath           string
}

// replaySummary is what a replay found, for the closing lines and for demo.
type replaySummary struct {
	captures, bad int
	events        []detect.Event
	byClass       map[string]int
	samples       int64
	audio         time.Duration // capture time analysed
	busy          time.Duration // wall-clock time of the whole replay
	logPath       string
}

func runReplay(args []string, out, errOut io.Writer) error {
	fs := newFlags("replay", "PATH...", `
Analyses captures (files or folders, recursively: SigMF pairs and raw files;
raw files need --rate, real-valued ones --if and --lo-side too: a raw file
without them is reported and recorded as quarantined with the reason)
with the same detectors as the daemon, in time order, learning the site
baseline from clean captures as it goes. Prints a table of the events found
and a summary; --json prints the event-log records instead; --log appends
them to an event log. A capture that cannot be read is reported and recorded
as quarantined, and replay goes on; the exit status is 1 if any was bad.`, errOut)
	raw := addRawFlags(fs)
	logPath := fs.String("log", "", "append the records to this event log (JSON Lines, hash-chained, fsynced)")
	asJSON := fs.Bool("json", false, "print the event-log records (JSON Lines) instead of the table")
	baseline := fs.String("baseline", "", "baseline file: loaded if it exists, saved at the end")
	quiet := fs.Bool("quiet", false, "no progress line on the terminal")
	workers := fs.Int("workers", runtime.NumCPU(), "CPUs to analyse with: 1 measures the satellites inside the spectral pass; 2 or more on a read of their own beside it (the output does not depend on this)")
	reportDir := fs.String("report", "", "write the analyst's report into this folder: index.html with PNG pictures beside it")
	reportAll := fs.Bool("report-all", false, "with --report: draw every capture, not only those with events")
	annotate := fs.Bool("annotate", false, "write each event as a SigMF annotation into a copy of its capture's metadata, --report folder/annotations/NAME.sigmf-meta (raw captures get none)")
	inPlace := fs.Bool("in-place", false, "with --annotate: rewrite the captures' own .sigmf-meta instead, atomically (earlier quietband annotations are replaced, everything else is kept)")
	csvPath := fs.String("csv", "", "write the events to this CSV file, one row per event (columns: see the report package documentation)")
	settings, err := parsePathArgs(fs, args, raw)
	if err != nil {
		return err
	}
	sum, err := replay(context.Background(), replayOptions{paths: fs.Args(), raw: settings, logPath: *logPath,
		json: *asJSON, baseline: *baseline, progress: !*quiet && isTerminal(os.Stderr), workers: *workers, out: out, errOut: errOut,
		reportDir: *reportDir, reportAll: *reportAll, annotate: *annotate, inPlace: *inPlace, csvPath: *csvPath})
	if err != nil {
		return err
	}
	if !*asJSON {
		printEvents(out, sum.events)
		printSummary(out, sum)
	}
	if sum.bad > 0 {
		return exitCode(1)
	}
	return nil
}

func isTerminal(f *os.File) bool {
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// job is one capture to analyse, in the order of analysis.
type job struct {
	path, name string
	capture    *ingest.Capture
	problem    error
	start      time.Time
}

// collect finds the captures under the paths, opens them (a failure is kept
// as the job's problem) and orders them by start time, then name.
func collect(paths []string, raw ingest.RawSettings) ([]job, error) {
	var jobs []job
	for _, root := range paths {
		found, err := ingest.FindRaw(raw, root)
		if err != nil {
			return nil, err
		}
		base := root
		if st, err := os.Stat(root); err == nil && !st.IsDir() {
			base = filepath.Dir(root)
		}
		for _, f := range found {
			name, err := filepath.Rel(base, f.Path)
			if err != nil {
				name = f.Path
			}
			j := job{path: f.Path, name: filepath.ToSlash(name), problem: f.Problem}
			if j.problem == nil {
				j.capture, j.problem = ingest.Open(f.Path, raw)
			}
			if j.capture != nil {
				j.start = j.capture.Start()
			}
			jobs = append(jobs, j)
		}
	}
	sort.SliceStable(jobs, func(a, b int) bool {
		if !jobs[a].start.Equal(jobs[b].start) {
			return jobs[a].start.Before(jobs[b].start)
		}
		return jobs[a].name < jobs[b].name
	})
	return jobs, nil
}

func replay(ctx context.Context, o replayOptions) (*replaySummary, error) {
	jobs, err := collect(o.paths, o.raw)
	if err != nil {
		return nil, err
	}
	aout, err := newAnalystOut(o, "replay", strings.Join(o.paths, " "))
	if err != nil {
		return nil, err
	}
	state := detect.NewState()
	if o.baseline != "" {
		b, err := baseline.Load(o.baseline)
		switch {
		case err == nil:
			state.Baselines = b
		case !errors.Is(err, os.ErrNotExist):
			return nil, err
		}
	}
	pipe := detect.NewPipeline(detect.Config{}, state)
	// One meter for every input: it keeps what it learns apart per
	// baseline key. Either placement gives it the same blocks in the same
	// order, so the records are the same whatever the number of workers.
	pipe.GNSS = &detect.GNSSMeter{}
	pipe.SatellitePlacement = satellitePlacement(o.workers)

	logPath := o.logPath
	if logPath == "" && o.json {
		dir, err := os.MkdirTemp("", "quietband-replay-")
		if err != nil {
			return nil, err
		}
		defer os.RemoveAll(dir)
		logPath = filepath.Join(dir, "events.jsonl")
	}
	var log *eventlog.Log
	if logPath != "" {
		log, err = eventlog.Open(logPath, eventlog.Options{})
		if err != nil {
			return nil, err
		}
		defer log.Close()
	}
	startSeq := uint64(0)
	if log != nil {
		startSeq = log.LastSeq()
	}
	sum := &replaySummary{byClass: map[string]int{}, logPath: o.logPath}
	t0 := time.Now()
	for i, j := range jobs {
		if o.progress {
			fmt.Fprintf(o.errOut, "\r%s %s\033[K", progressBar(i, len(jobs), 30), j.name)
		}
		sum.captures++
		var items []eventlog.Item
		if j.problem != nil {
			sum.bad++
			fmt.Fprintf(o.errOut, "quietband replay: quarantined %s: %v\n", j.name, j.problem)
			items = append(items, eventlog.Item{Kind: "capture", Body: quarantined(j.name, j.problem)})
		} else {
			pipe.Observer = aout.observer()
			res, err := pipe.Process(ctx, j.capture, j.name)
			if err != nil {
				sum.bad++
				fmt.Fprintf(o.errOut, "quietband replay: quarantined %s: %v\n", j.name, err)
				items = append(items, eventlog.Item{Kind: "capture", Body: quarantined(j.name, err)})
			} else {
				for _, e := range res.Events {
					items = append(items, eventlog.Item{Kind: "event", Body: e})
					sum.byClass[e.Class]++
				}
				sum.events = append(sum.events, res.Events...)
				items = append(items, eventlog.Item{Kind: "capture", Body: res.Record})
				sum.samples += j.capture.Samples
				sum.audio += j.capture.Duration()
			}
		}
		if log != nil {
			if _, err := log.AppendBatch(items); err != nil {
				return nil, err
			}
		}
		if err := aout.done(j, items); err != nil {
			return nil, err
		}
	}
	if err := aout.close(); err != nil {
		return nil, err
	}
	sum.busy = time.Since(t0)
	if o.progress && len(jobs) > 0 {
		fmt.Fprintf(o.errOut, "\r\033[K")
	}
	if o.baseline != "" {
		if err := baseline.Save(o.baseline, state.Baselines); err != nil {
			return nil, err
		}
	}
	if o.json && log != nil {
		r := eventlog.NewReader(logPath)
		defer r.Close()
		for {
			rec, err := r.Next()
			if errors.Is(err, io.EOF) {
				break
			}
			if err != nil {
				return nil, err
			}
			if rec.Seq > startSeq {
				fmt.Fprintf(o.out, "%s\n", rec.Line)
			}
		}
	}
	return sum, nil
}

func quarantined(name string, err error) detect.CaptureRecord {
	msg := err.Error()
	var ce *ingest.CaptureError
	if errors.As(err, &ce) {
		msg = ce.Error()
	}
	return detect.CaptureRecord{Capture: name, Status: detect.StatusQuarantined, Error: msg}
}

func printEvents(w io.Writer, events []detect.Event) {
	if len(events) == 0 {
		fmt.Fprintln(w, "no interference found")
		return
	}
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "CAPTURE\tCLASS\tSTART\tDURATION\tOFFSET\tBANDWIDTH\tJ/N\tC/N0 LOSS\tDETAIL")
	for _, e := range events {
		loss := "-"
		if e.Impact != nil {
			loss = fmt.Sprintf("%.1f dB", e.Impact.CN0DegradationDB)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%.1f ms\t%+.1f kHz\t%.1f kHz\t%.1f dB\t%s\t%s\n",
			e.Capture, e.Class, e.Start.Format("15:04:05.000"), e.End.Sub(e.Start.Time).Seconds()*1e3,
			e.OffsetHz/1e3, e.BandwidthHz/1e3, e.JNDB, loss, detail(e))
	}
	tw.Flush()
}

// detail is the class-specific part of a table row: the report's
// words, one renderer for the table, the report and the CSV.
func detail(e detect.Event) string { return report.Detail(e) }

func printSummary(w io.Writer, s *replaySummary) {
	var classes []string
	for _, c := range detect.Classes {
		if n := s.byClass[c]; n > 0 {
			classes = append(classes, fmt.Sprintf("%s %d", c, n))
		}
	}
	if len(classes) == 0 {
		classes = []string{"none"}
	}
	fmt.Fprintf(w, "\n%d capture(s), %d bad; %d event(s): %s\n", s.captures, s.bad, len(s.events), strings.Join(classes, ", "))
	if ok := s.captures - s.bad; ok > 0 && s.busy > 0 {
		fmt.Fprintf(w, "%.1f ms per capture, %.1f× real time (%.3g s of signal in %.3g s)\n",
			float64(s.busy.Milliseconds())/float64(ok), s.audio.Seconds()/s.busy.Seconds(), s.audio.Seconds(), s.busy.Seconds())
	}
	if s.logPath != "" {
		fmt.Fprintf(w, "event log: %s\n", s.logPath)
	}
}

// satellitePlacement is where replay with the given number of workers
// measures the satellites: inside the spectral pass with one, on a read of
// their own beside it with more (a second read and decode of each capture,
// in exchange for two goroutines that share nothing). Measured on two CPUs
// (BenchmarkReplayModes -cpu 2, 10 MS/s ci16_le, eight satellites, ms per
// 1 s capture): see the README's Measurements. Each capture's satellites
// are measured while its spectral pass runs, not ahead of it: what the
// meter learns from one capture (the site's clock offset, the spectrum
// orientation) shapes the next capture's measurement, so captures of one
// site are measured in time order.
func satellitePlacement(workers int) detect.SatellitePlacement {
	if workers <= 1 {
		return detect.SatellitesInPass
	}
	return detect.SatellitesOwnRead
}

// progressBar draws done of total as a bar of width cells with the count.
func progressBar(done, total, width int) string {
	if total <= 0 {
		return ""
	}
	fill := done * width / total
	return fmt.Sprintf("[%s%s] %d/%d", strings.Repeat("#", fill), strings.Repeat(".", width-fill), done, total)
}
