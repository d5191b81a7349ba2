package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"text/tabwriter"
	"time"

	"quietband/detect"
	"quietband/detect/gnss"
	"quietband/ingest"
	"quietband/ingest/synth"
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
	if *seconds <= 0 || *captures < 1 || *repeat < 1 {
		return fmt.Errorf("--seconds must be > 0, --captures and --repeat ≥ 1")
	}
	dir, err := os.MkdirTemp("", "quietband-bench-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	fmt.Fprintf(out, "quietband bench: %s at %.4g MS/s, %d × %.3g s captures, %d CPU(s)\n\n", *format, *rate/1e6, *captures, *seconds, runtime.NumCPU())

	// Recorders write captures with and without core:sha512 (SigMF makes
	// it optional); when it is there, its check is a cost of its own.
	clean, err := benchCaptures(filepath.Join(dir, "clean"), *rate, *format, *seconds, *captures, false, false)
	if err != nil {
		return err
	}
	hashed, err := benchCaptures(filepath.Join(dir, "sha512"), *rate, *format, *seconds, *captures, false, true)
	if err != nil {
		return err
	}
	jammed, err := benchCaptures(filepath.Join(dir, "chirp"), *rate, *format, *seconds, 1, true, false)
	if err != nil {
		return err
	}
	ctx := context.Background()
	prev := runtime.GOMAXPROCS(1)
	defer runtime.GOMAXPROCS(prev)
	tw := tabwriter.NewWriter(out, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "STAGE (one core)\tTHROUGHPUT\tREAL TIME")
	samples := float64(clean[0].Samples)
	row := func(name string, d time.Duration, n float64) {
		ms := n / d.Seconds() / 1e6
		fmt.Fprintf(tw, "%s\t%.1f MS/s\t%.1f×\n", name, ms, ms*1e6 / *rate)
	}
	d, err := timeRead(clean[0])
	if err != nil {
		return err
	}
	row("read: decode + SHA-256", d, samples)
	d512, err := timeRead(hashed[0])
	if err != nil {
		return err
	}
	row("read with a core:sha512 to check", d512, samples)
	for _, c := range []struct {
		name string
		cap  *ingest.Capture
	}{{"read + spectral bank, clean", clean[0]}, {"read + spectral bank, chirp jammer", jammed[0]}} {
		p := detect.NewPipeline(detect.Config{}, nil)
		if _, err := p.Process(ctx, c.cap, "warm-up"); err != nil {
			return err
		}
		t0 := time.Now()
		if _, err := p.Process(ctx, c.cap, "bench"); err != nil {
			return err
		}
		row(c.name, time.Since(t0), samples)
	}
	acq, track, err := timeGNSS(ctx, clean[0])
	if err != nil {
		return err
	}
	fmt.Fprintf(tw, "GPS acquisition (32 PRNs, 10 ms snapshot)\t%.0f ms per capture\t\n", acq.Seconds()*1e3)
	row("GPS C/N0 tracking", track, samples)
	tw.Flush()

	fmt.Fprintln(out)
	tw = tabwriter.NewWriter(out, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "WHOLE PIPELINE (satellites included; median of %d)\tCORES\tREAL TIME\tSCALING\n", *repeat)
	for _, set := range []struct{ name, dir string }{{"captures without core:sha512", "clean"}, {"captures with core:sha512", "sha512"}} {
		cores := []int{1, runtime.NumCPU()}
		rt := make([][]float64, len(cores))
		n := 0
		// The runs alternate between the core counts, so that a slow
		// spell of a shared machine falls on both.
		for range *repeat {
			for i, c := range cores {
				runtime.GOMAXPROCS(c)
				t0 := time.Now()
				sum, err := replayCaptures(ctx, replayOptions{paths: []string{filepath.Join(dir, set.dir)}, workers: c, out: io.Discard, errOut: io.Discard})
				if err != nil {
					return err
				}
				rt[i] = append(rt[i], sum.Signal.Seconds()/time.Since(t0).Seconds())
				n = sum.Captures
			}
		}
		one := median(rt[0])
		for i, c := range cores {
			scaling := ""
			if i > 0 {
				scaling = fmt.Sprintf("%.2f×", median(rt[i])/one)
			}
			fmt.Fprintf(tw, "%d %s\t%d\t%.2f×\t%s\n", n, set.name, c, median(rt[i]), scaling)
		}
	}
	return tw.Flush()
}

// median returns the median of v (the mean of the middle two for an even
// count); v is sorted in place.
func median(v []float64) float64 {
	slices.Sort(v)
	if len(v)%2 == 1 {
		return v[len(v)/2]
	}
	return (v[len(v)/2-1] + v[len(v)/2]) / 2
}

// benchCaptures synthesizes n captures (eight satellites and noise, and a
// chirp jammer when jam) and opens them; their metadata keeps its
// core:sha512 only if sha512 is set.
func benchCaptures(dir string, fs float64, format string, seconds float64, n int, jam, sha512 bool) ([]*ingest.Capture, error) {
	s := synth.Demo()
	s.Name, s.Format, s.SampleRate = "bench", format, fs
	sky := s.Captures[0].Satellites
	s.Captures = nil
	for i := 0; i < n; i++ {
		c := synth.Capture{Name: fmt.Sprintf("bench-%02d", i), DurationS: seconds, OffsetS: float64(i) * seconds, Satellites: sky}
		if jam {
			c.Emitters = []synth.Emitter{{Kind: synth.KindSwept, JNDB: 10, LowHz: -0.3 * fs, HighHz: 0.3 * fs, PeriodS: 12e-6}}
		}
		s.Captures = append(s.Captures, c)
	}
	truths, err := synth.Write(&s, dir)
	if err != nil {
		return nil, err
	}
	var out []*ingest.Capture
	for _, t := range truths {
		c, err := ingest.Open(filepath.Join(dir, t.Capture), ingest.RawSettings{})
		if err != nil {
			return nil, err
		}
		if !sha512 {
			c.Meta.Global.SHA512 = ""
			if err := ingest.WriteMeta(c.MetaPath, c.Meta); err != nil {
				return nil, err
			}
		}
		out = append(out, c)
	}
	return out, nil
}

func timeRead(c *ingest.Capture) (time.Duration, error) {
	t0 := time.Now()
	r, err := c.NewReader(1 << 17)
	if err != nil {
		return 0, err
	}
	defer r.Close()
	for {
		if _, err := r.Next(); errors.Is(err, io.EOF) {
			break
		} else if err != nil {
			return 0, err
		}
	}
	return time.Since(t0), nil
}

// timeGNSS measures acquisition on the capture's first snapshot, and the
// whole satellite measurement, whose difference is tracking.
func timeGNSS(ctx context.Context, c *ingest.Capture) (acq, track time.Duration, err error) {
	center, _ := c.CenterHz()
	a, err := gnss.NewAcquirer(gnss.AcqConfig{}, c.SampleRate, center)
	if err != nil {
		return 0, 0, err
	}
	r, err := c.NewReader(a.SnapshotLen())
	if err != nil {
		return 0, 0, err
	}
	defer r.Close() // after the acquisition: the block is valid until then
	b, err := r.Next()
	if err != nil {
		return 0, 0, err
	}
	t0 := time.Now()
	if _, err := a.Acquire(nil, b.Samples); err != nil {
		return 0, 0, err
	}
	acq = time.Since(t0)
	p := detect.NewPipeline(detect.Config{}, nil)
	t0 = time.Now()
	if _, err := detect.MeasureSatellites(ctx, c, &detect.GNSSMeter{}, p.BlockLen(c.SampleRate)); err != nil {
		return 0, 0, err
	}
	return acq, max(time.Since(t0)-acq, time.Nanosecond), nil
}
