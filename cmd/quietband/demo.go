package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"quietband/ingest"
	"quietband/ingest/synth"
)

func init() {
	register("demo", "synthesize an invented morning at a site, analyse it, show the events", runDemo)
}

func runDemo(args []string, out, errOut io.Writer) error {
	fs := newFlags("demo", "", `
One command, no set-up: synthesizes the built-in demo scenario (the invented
Kestrel Quay pilot station: a clean morning, then a passing van with a chirp
jammer, an amplifier spur, a pulsed emitter and a noise jammer) into a
folder, replays it exactly as 'quietband replay' would, prints the events
and says where the captures and the event log are. Nothing is transmitted.`, errOut)
	dir := fs.String("out", "", "folder for the captures and the log (default: a new temporary folder)")
	reportDir := fs.String("report", "", "also write the analyst's report (index.html and pictures of every capture) into this folder")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *dir == "" {
		d, err := os.MkdirTemp("", "quietband-demo-")
		if err != nil {
			return err
		}
		*dir = d
	}
	capDir := filepath.Join(*dir, "captures")
	s := synth.Demo()
	if err := s.Normalize(); err != nil {
		return err
	}
	fmt.Fprintf(out, "Synthesizing %q (%d captures of %.2f s, %s at %.3g MS/s) into %s\n",
		s.Description, len(s.Captures), s.Captures[0].DurationS, s.Format, s.SampleRate/1e6, capDir)
	if _, err := synth.Write(&s, capDir); err != nil {
		return err
	}
	logPath := filepath.Join(*dir, "events.jsonl")
	sum, err := replayCaptures(context.Background(), replayOptions{paths: []string{capDir}, raw: ingest.RawSettings{},
		logPath: logPath, out: out, errOut: errOut, reportDir: *reportDir, reportAll: *reportDir != "",
		command: "demo", source: "the demo's captures (quietband demo: " + s.Description + ")"})
	if err != nil {
		return err
	}
	fmt.Fprintln(out)
	printEvents(out, sum)
	printSummary(out, sum, logPath)
	fmt.Fprintf(out, "check the log with: quietband verify %s\n", logPath)
	return nil
}
