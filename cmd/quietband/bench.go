package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"text/tabwriter"

	"quietband/ingest"
	"quietband/metrics/bench"
	"quietband/metrics/report"
)

func init() {
	register("bench", "measure whether this machine keeps up with a recorder: throughput per stage, real-time factor", runBench)
}

func runBench(args []string, out, errOut io.Writer) error {
	fs := newFlags("bench", "", `
Synthesizes captures like a recorder's (GPS satellites and noise, with and
without a core:sha512 in their metadata, and one with a chirp jammer, which
wakes the costlier sweep analysis) at the given rate and format into a
temporary folder, then measures each stage on one core: reading (decode and
SHA-256, and the core:sha512 check), the spectral detector bank, GPS
acquisition and C/N0 tracking; and the whole pipeline's real-time factor on
one core and on all cores, and the ratio of the two (scaling). A real-time
factor above 1 keeps up.`, errOut)
	rate := fs.Float64("rate", 10e6, "sample rate in samples/s")
	format := fs.String("format", "ci16_le", "sample format (SigMF datatype)")
	seconds := fs.Float64("seconds", 1, "length of each synthesized capture in seconds")
	captures := fs.Int("captures", 4, "captures per whole-pipeline run")
	repeat := fs.Int("repeat", 3, "whole-pipeline runs per core count (the median is shown)")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if _, err := ingest.ParseFormat(*format); err != nil {
		return fmt.Errorf("--format: %w", err)
	}
	if !(*rate > 0) || math.IsInf(*rate, 0) {
		return fmt.Errorf("--rate %g: give the recorder's sample rate in samples/s, above 0 (e.g. 10e6)", *rate)
	}
	if *seconds <= 0 || *captures < 1 || *repeat < 1 {
		return fmt.Errorf("--seconds must be > 0, --captures and --repeat ≥ 1")
	}
	dir, err := os.MkdirTemp("", "quietband-bench-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	fmt.Fprintf(out, "quietband bench: %s at %.4g MS/s, %d × %.3g s captures, %d CPU(s)\n\n", *format, *rate/1e6, *captures, *seconds, runtime.NumCPU())
	fmt.Fprintf(errOut, "quietband bench: measuring the stages, then %d whole-pipeline run(s) per core count; this takes a while\n", *repeat)
	res, err := bench.Run(context.Background(), bench.Options{Dir: dir, Rate: *rate, Format: *format, Seconds: *seconds, Captures: *captures, Repeat: *repeat})
	if err != nil {
		return err
	}
	tw := tabwriter.NewWriter(out, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "STAGE (one core)\tTHROUGHPUT\tREAL TIME")
	for _, st := range res.Stages {
		if st.PerCapture {
			fmt.Fprintf(tw, "%s\t%.0f ms per capture\t\n", st.Name, st.Took.Seconds()*1e3)
			continue
		}
		ms := st.Samples / st.Took.Seconds() / 1e6
		fmt.Fprintf(tw, "%s\t%.1f MS/s\t%.1f×\n", st.Name, ms, ms*1e6 / *rate)
	}
	tw.Flush()
	fmt.Fprintln(out)
	tw = tabwriter.NewWriter(out, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "WHOLE PIPELINE (satellites included; median of %d)\tCORES\tREAL TIME\tSCALING\n", *repeat)
	one := map[string]float64{} // each set's first run: one core
	for _, p := range res.Pipelines {
		scaling := ""
		if base, ok := one[p.Set]; ok {
			scaling = fmt.Sprintf("%.2f×", p.RealTime/base)
		} else {
			one[p.Set] = p.RealTime
		}
		fmt.Fprintf(tw, "%d %s\t%d\t%.2f×\t%s\n", p.Captures, p.Set, p.Cores, p.RealTime, scaling)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	// The verdict: the slowest set on the most cores measured.
	worst, cores := math.Inf(1), 0
	for _, p := range res.Pipelines {
		if p.Cores > cores {
			worst, cores = p.RealTime, p.Cores
		} else if p.Cores == cores {
			worst = math.Min(worst, p.RealTime)
		}
	}
	if cores > 0 {
		verdict := "keeps up with"
		if worst < 1 {
			verdict = "does NOT keep up with"
		}
		fmt.Fprintf(out, "\nverdict: this machine %s a recorder writing %s at %s without pause (real-time factor %.2f× on %d core(s), the slowest set; above 1 keeps up)\n",
			verdict, *format, report.SI(*rate, "S/s"), worst, cores)
	}
	return nil
}
