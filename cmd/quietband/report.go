package main

import (
	"context"
	"fmt"
	"io"
	"path/filepath"

	"quietband/metrics/report"
)

func init() {
	register("report", "rebuild the analyst's report (pictures, HTML) from an event log and its captures", runReport)
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
	sum, err := report.Rebuild(context.Background(), report.RebuildOptions{Log: pos[0], Captures: *root, Out: *outDir, All: *all, Baseline: *baseline,
		Note: func(capture, note string) { fmt.Fprintf(errOut, "quietband report: %s: %s\n", capture, note) }})
	if err != nil {
		return err
	}
	fmt.Fprintf(out, "%d capture(s) from %s, %d drawn, %d not found or changed; report: %s\n",
		sum.Captures, pos[0], sum.Drawn, sum.Missing, filepath.Join(*outDir, "index.html"))
	if sum.Analysed > 0 && sum.Missing == sum.Analysed {
		// Nothing could be drawn: most likely the wrong --captures (issue
		// 18: it exited 0 with a report of empty cards).
		return fmt.Errorf("none of the %d analysed capture(s) the log names was found under %s: give --captures, the folder the log's capture names are relative to", sum.Analysed, *root)
	}
	return nil
}
