package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"unicode/utf8"

	"quietband/ingest"
	"quietband/ingest/synth"
	"quietband/metrics/report"
)

func init() {
	register("synth", "write captures with exactly known content (never transmits)", runSynth)
}

func runSynth(args []string, out, errOut io.Writer) error {
	fs := newFlags("synth", "", `
Writes synthesized IQ captures with a truth sidecar (NAME.truth.json) beside
each: GPS L1 C/A satellites at a stated C/N0, thermal noise and interference
with known parameters. It writes files only; quietband never transmits.

The scenario is a built-in one (--scenario, see --list) or a YAML file
(--file). Without either, every built-in scenario is written, one folder each.`, errOut)
	outDir := fs.String("out", "captures", "folder to write into (created if missing)")
	name := fs.String("scenario", "", "built-in scenario to write (default: all of them)")
	file := fs.String("file", "", "YAML scenario file to write instead of a built-in one")
	list := fs.Bool("list", false, "list the built-in scenarios and exit")
	format := fs.String("format", "", "override the sample format (SigMF datatype, e.g. ci8, cu8, ci16_le, cf32_le)")
	rate := fs.Float64("rate", 0, "override the sample rate in samples/s (e.g. 10e6)")
	duration := fs.Float64("duration", 0, "set every capture's duration in seconds, scaling every time within it by the same factor (emitters' start, end and on intervals, spoofers' start and end, the front end's gain steps, sample drops and gaps); 0 keeps the scenario's")
	raw := fs.Bool("raw", false, "write raw sample files instead of SigMF pairs")
	seed := fs.Uint64("seed", 0, "override the random seed (0 keeps the scenario's)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(errOut, "quietband synth: unexpected arguments %q\n", fs.Args())
		return errUsage
	}
	if !(*duration >= 0) || math.IsInf(*duration, 0) {
		return fmt.Errorf("--duration %g: give a capture length in seconds (> 0), or 0 to keep the scenario's", *duration)
	}
	if *list {
		names := synth.BuiltinNames()
		width := 0
		for _, n := range names {
			width = max(width, utf8.RuneCountInString(n))
		}
		for _, n := range names {
			s, _ := synth.Builtin(n)
			fmt.Fprintf(out, "%-*s  %d capture(s), %s at %.3g MS/s: %s\n", width, n, len(s.Captures), s.Format, s.SampleRate/1e6, s.Description)
		}
		return nil
	}
	var scenarios []synth.Scenario
	switch {
	case *file != "":
		s, err := synth.LoadScenario(*file)
		if err != nil {
			return err
		}
		scenarios = append(scenarios, *s)
	case *name != "":
		s, err := synth.Builtin(*name)
		if err != nil {
			return err
		}
		scenarios = append(scenarios, s)
	default:
		for _, n := range synth.BuiltinNames() {
			s, _ := synth.Builtin(n)
			scenarios = append(scenarios, s)
		}
	}
	if *format != "" {
		if _, err := ingest.ParseFormat(*format); err != nil {
			return fmt.Errorf("--format: %w", err)
		}
	}
	for _, s := range scenarios {
		if *format != "" {
			s.Format = *format
		}
		if *rate != 0 {
			s.SampleRate = *rate
		}
		if *raw {
			s.Raw = true
		}
		if *seed != 0 {
			s.Seed = *seed
		}
		if *duration != 0 {
			s.ScaleDuration(*duration)
		}
		dir := *outDir
		if len(scenarios) > 1 {
			dir = strings.TrimRight(dir, "/") + "/" + s.Name
		}
		truths, err := synth.Write(&s, dir)
		if err != nil {
			return err
		}
		for _, t := range truths {
			fmt.Fprintf(out, "%s/%s  %s %s, %d samples, %s, %s\n", dir, t.Capture, t.Format, report.SI(t.SampleRate, "S/s"),
				t.Samples, report.Count(len(t.Satellites), "satellite"), report.Count(len(t.Emitters), "emitter"))
		}
	}
	return nil
}
