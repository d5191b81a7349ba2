package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"text/tabwriter"

	"quietband/detect"
	"quietband/ingest"
	"quietband/metrics/eventlog"
	"quietband/metrics/replay"
	"quietband/metrics/report"
)

func init() {
	register("replay", "analyse archived captures: event table, JSON records, event log", runReplay)
}

// replayOptions are what replay, demo and bench share.
type replayOptions struct {
	paths    []string
	raw      ingest.RawSettings
	logPath  string
	json     bool
	baseline string
	progress bool
	workers  int
	// clockRange is detect.Config.ClockRangeHz (0: the default).
	clockRange float64
	out        io.Writer
	errOut     io.Writer
	// analysts' outputs (metrics/report)
	reportDir         string
	reportAll         bool
	annotate, inPlace bool
	csvPath           string
	source            string // the report's source line ("": the paths)
	command           string // the command its messages name ("": replay)
}

func runReplay(args []string, out, errOut io.Writer) error {
	fs := newFlags("replay", "PATH...", `
Analyses captures (files or folders, recursively: SigMF pairs and raw files;
raw files need --rate, real-valued ones --if and --lo-side too: a raw file
without them is reported and recorded as quarantined with the reason)
with the same detectors as the daemon, in time order, learning the site
baseline from clean captures as it goes. Prints a table of the events found
and a summary; --json prints the event-log records instead; --event-log appends
them to an event log. A capture that cannot be read is reported and recorded
as quarantined, and replay goes on; the exit status is 1 if any was bad.`, errOut)
	raw := addRawFlags(fs)
	logPath := fs.String("event-log", "", "append the records to this event log (JSON Lines, hash-chained, fsynced)")
	fs.StringVar(logPath, "log", "", "the same as --event-log (the older name)")
	asJSON := fs.Bool("json", false, "print the event-log records (JSON Lines) instead of the table")
	baseline := fs.String("baseline", "", "baseline file: loaded if it exists, saved at the end")
	quiet := fs.Bool("quiet", false, "no progress line on the terminal")
	workers := fs.Int("workers", runtime.NumCPU(), "CPUs to analyse with: 1 measures the satellites inside the spectral pass; 2 or more on a read of their own beside it (the output does not depend on this)")
	clockRange := fs.Float64("clock-range", 0, "one-sided receiver clock offset in `Hz` the satellite search covers, on top of the ±5 kHz of the satellites' own Doppler, until a site's offset is known (0: 10000, about 6 ppm at L1; at most 45000); widen it for a recorder without a TCXO")
	reportDir := fs.String("report", "", "write the analyst's report into this folder: index.html with PNG pictures beside it")
	reportAll := fs.Bool("all", false, "with --report: draw every capture, not only those with events (as report --all)")
	fs.BoolVar(reportAll, "report-all", false, "the same as --all (the older name)")
	annotate := fs.Bool("annotate", false, "write each event as a SigMF annotation into a copy of its capture's metadata, --report folder/annotations/NAME.sigmf-meta (raw captures get none)")
	inPlace := fs.Bool("in-place", false, "with --annotate: rewrite the captures' own .sigmf-meta instead, atomically (earlier quietband annotations are replaced, everything else is kept)")
	csvPath := fs.String("csv", "", "write the events to this CSV file, one row per event (columns: capture, id, episode, class, start, end, duration_s, sample_start, sample_count, offset_hz, center_hz, bandwidth_hz, freq_lower_hz, freq_upper_hz, jn_db, power_dbfs, cn0_loss_db, detectors, related, params; README, The analyst's report)")
	settings, err := parsePathArgs(fs, args, raw)
	if err != nil {
		return err
	}
	if err := (detect.Config{ClockRangeHz: *clockRange}).Defaults(1e6).Validate(); err != nil {
		return fmt.Errorf("--clock-range: %w", err)
	}
	sum, err := replayCaptures(context.Background(), replayOptions{paths: fs.Args(), raw: settings, logPath: *logPath,
		json: *asJSON, baseline: *baseline, progress: !*quiet && isTerminal(os.Stderr), workers: *workers, clockRange: *clockRange, out: out, errOut: errOut,
		reportDir: *reportDir, reportAll: *reportAll, annotate: *annotate, inPlace: *inPlace, csvPath: *csvPath})
	if err != nil {
		return err
	}
	if sum.Captures == 0 {
		// An empty or mistyped folder is no clean sky (issue 18).
		return fmt.Errorf("no captures found in %s (SigMF pairs, or raw files: .ci8, .cu8, .ci16, .cf32 ... or any name with --format and --pattern)", strings.Join(fs.Args(), " "))
	}
	if !*asJSON {
		printEvents(out, sum)
		printSummary(out, sum, *logPath)
	}
	if sum.Bad > 0 {
		return exitCode(1)
	}
	return nil
}

func isTerminal(f *os.File) bool {
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// replayCaptures runs the replay driver (metrics/replay) with the event
// log, the analyst's outputs, progress and quarantine lines the options
// ask for, and prints the records with --json.
func replayCaptures(ctx context.Context, o replayOptions) (*replay.Summary, error) {
	switch {
	case o.inPlace && !o.annotate:
		return nil, errors.New("--in-place rewrites the captures' metadata with annotations: it goes with --annotate")
	case o.annotate && !o.inPlace && o.reportDir == "":
		return nil, errors.New("--annotate writes annotated copies of the metadata into the --report folder: give --report DIR, or --in-place to annotate the captures themselves")
	case o.reportAll && o.reportDir == "":
		return nil, errors.New("--all (draw every capture) goes with --report DIR")
	}
	prefix := "quietband replay: "
	if o.command != "" {
		prefix = "quietband " + o.command + ": "
	}
	source := o.source
	if source == "" {
		source = strings.Join(o.paths, " ")
	}
	outs, err := report.NewOutputs(report.OutputOptions{Dir: o.reportDir, All: o.reportAll, Source: source,
		Annotate: o.annotate, InPlace: o.inPlace, CSV: o.csvPath, Messages: o.errOut, Prefix: prefix})
	if err != nil {
		return nil, err
	}
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
	ro := replay.Options{Paths: o.paths, Raw: o.raw, Baseline: o.baseline, Workers: o.workers, ClockRangeHz: o.clockRange, Log: log,
		Observer: outs.Observer,
		Done: func(f ingest.Found, out replay.Outcome) error {
			if out.Err != nil {
				fmt.Fprintf(o.errOut, "%squarantined %s: %v\n", prefix, f.Name, out.Err)
			}
			return outs.Done(f, out.Record, out.Events)
		}}
	if o.progress {
		ro.Progress = func(i, n int, f ingest.Found) {
			fmt.Fprintf(o.errOut, "\r%s %s\033[K", progressBar(i, n, 30), f.Name)
		}
	}
	sum, err := replay.Run(ctx, ro)
	if err != nil {
		return nil, err
	}
	if err := outs.Close(); err != nil {
		return nil, err
	}
	if o.progress && sum.Captures > 0 {
		fmt.Fprintf(o.errOut, "\r\033[K")
	}
	if o.json && log != nil {
		recs, err := eventlog.RecordsAfter(logPath, startSeq)
		if err != nil {
			return nil, err
		}
		for _, rec := range recs {
			fmt.Fprintf(o.out, "%s\n", rec.Line)
		}
	}
	return sum, nil
}

// printEvents prints a replay's events as a table, or, when it found
// none, says why: no capture analysed (all quarantined) is no statement
// about the sky.
func printEvents(w io.Writer, sum *replay.Summary) {
	events := sum.Events
	if len(events) == 0 {
		switch ok := sum.Captures - sum.Bad; {
		case sum.Captures == 0:
			fmt.Fprintln(w, "no captures found")
		case ok == 0:
			fmt.Fprintf(w, "no capture could be analysed: %d quarantined (reasons above)\n", sum.Bad)
		default:
			fmt.Fprintf(w, "no interference found in %d analysed capture(s)\n", ok)
		}
		return
	}
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "CAPTURE\tCLASS\tSTART\tDURATION\tOFFSET\tBANDWIDTH\tJ/N\tC/N0 LOSS\tDETAIL")
	for _, e := range events {
		loss, jn := "-", "-"
		if l, ok := report.Loss(e); ok {
			loss = fmt.Sprintf("%.1f dB", l)
		}
		if v, ok := report.JN(e); ok {
			jn = fmt.Sprintf("%.1f dB", v)
		}
		start, dur := "-", "-" // a capture without a time (no core:datetime)
		if !e.Start.IsZero() {
			start = e.Start.Format("15:04:05.000")
			dur = fmt.Sprintf("%.1f ms", e.End.Sub(e.Start.Time).Seconds()*1e3)
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%+.1f kHz\t%.1f kHz\t%s\t%s\t%s\n",
			e.Capture, e.Class, start, dur,
			e.OffsetHz/1e3, e.BandwidthHz/1e3, jn, loss, report.Detail(e))
	}
	tw.Flush()
}

// printSummary prints the closing lines of a replay: captures, events by
// class, speed, and where the log is.
func printSummary(w io.Writer, s *replay.Summary, logPath string) {
	var classes []string
	for _, c := range detect.Classes {
		if n := s.ByClass[c]; n > 0 {
			classes = append(classes, fmt.Sprintf("%s %d", c, n))
		}
	}
	if len(classes) == 0 {
		classes = []string{"none"}
	}
	fmt.Fprintf(w, "\n%d capture(s), %d bad; %d event(s): %s\n", s.Captures, s.Bad, len(s.Events), strings.Join(classes, ", "))
	if ok := s.Captures - s.Bad; ok > 0 && s.Busy > 0 {
		fmt.Fprintf(w, "%.1f ms per capture, %.1f× real time (%.3g s of signal in %.3g s)\n",
			float64(s.Busy.Milliseconds())/float64(ok), s.Signal.Seconds()/s.Busy.Seconds(), s.Signal.Seconds(), s.Busy.Seconds())
	}
	if logPath != "" {
		fmt.Fprintf(w, "event log: %s\n", logPath)
	}
	if n := s.AlreadyRecorded; n > 0 {
		fmt.Fprintf(w, "%d of the %d capture(s) already recorded in the event log with the same data (SHA-256) and configuration: nothing new written for them\n", n, s.Captures)
	}
}

// progressBar draws done of total as a bar of width cells with the count.
func progressBar(done, total, width int) string {
	if total <= 0 {
		return ""
	}
	fill := done * width / total
	return fmt.Sprintf("[%s%s] %d/%d", strings.Repeat("#", fill), strings.Repeat(".", width-fill), done, total)
}
