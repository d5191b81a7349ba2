package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"time"

	"quietband/ingest"
)

func init() {
	register("info", "describe captures: format, rate, centre, time, power, clipping", runInfo)
}

// rawFlags are the settings raw files need, shared by every command that
// reads captures.
type rawFlags struct {
	format *string
	rate   *float64
	center *float64
}

func addRawFlags(fs interface {
	String(string, string, string) *string
	Float64(string, float64, string) *float64
}) rawFlags {
	return rawFlags{
		format: fs.String("format", "", "sample format of raw files (SigMF datatype: ci8, cu8, ci16_le, ci16_be, cf32_le, ...); default from the file extension"),
		rate:   fs.Float64("rate", 4e6, "sample rate of raw files, samples/s"),
		center: fs.Float64("center", 1575.42e6, "RF centre frequency of raw files, Hz (0: unknown)"),
	}
}

// parsePathArgs parses the flags of a command that takes capture paths,
// insists on at least one path, and returns the raw-file settings.
func parsePathArgs(fs *flag.FlagSet, args []string, raw rawFlags) (ingest.RawSettings, error) {
	if err := parseFlags(fs, args); err != nil {
		return ingest.RawSettings{}, err
	}
	if fs.NArg() == 0 {
		fs.Usage()
		return ingest.RawSettings{}, errUsage
	}
	return raw.settings()
}

func (r rawFlags) settings() (ingest.RawSettings, error) {
	s := ingest.RawSettings{SampleRate: *r.rate, CenterHz: *r.center, HasCenter: *r.center != 0}
	if *r.format != "" {
		f, err := ingest.ParseFormat(*r.format)
		if err != nil {
			return s, fmt.Errorf("--format: %w", err)
		}
		s.Format = f
	}
	return s, nil
}

func runInfo(args []string, out, errOut io.Writer) error {
	fs := newFlags("info", "PATH...", `
Describes each capture found in the given files and folders (recursively):
sample format, rate, centre frequency, start time, duration, mean power in
dBFS and the fraction of clipped samples. The whole file is read. A capture
that cannot be read gets a line saying why, and the exit status is 1.`, errOut)
	raw := addRawFlags(fs)
	settings, err := parsePathArgs(fs, args, raw)
	if err != nil {
		return err
	}
	found, err := ingest.Find(fs.Args()...)
	if err != nil {
		return err
	}
	bad := 0
	for _, f := range found {
		line, err := describe(f, settings)
		if err != nil {
			bad++
			fmt.Fprintf(out, "BAD  %v\n", err)
			continue
		}
		fmt.Fprintln(out, line)
	}
	if bad > 0 {
		return exitCode(1)
	}
	return nil
}

func describe(f ingest.Found, settings ingest.RawSettings) (string, error) {
	if f.Problem != nil {
		return "", f.Problem
	}
	c, err := ingest.Open(f.Path, settings)
	if err != nil {
		return "", err
	}
	r, err := c.NewReader(1 << 16)
	if err != nil {
		return "", err
	}
	defer r.Close()
	var power float64
	var clipped int64
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return "", err
		}
		for _, v := range b.Samples {
			power += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
		}
		clipped += int64(b.Clipped)
	}
	center := "centre unknown"
	if hz, ok := c.CenterHz(); ok {
		center = fmt.Sprintf("centre %.6f MHz", hz/1e6)
	}
	start := "start unknown"
	if t := c.Start(); !t.IsZero() {
		start = t.Format(time.RFC3339Nano)
	}
	return fmt.Sprintf("OK   %s  %s %.6g MS/s %s  %s  %.3f s  %.2f dBFS  clip %.2e",
		c.Name, c.Format, c.SampleRate/1e6, center, start, c.Duration().Seconds(),
		10*math.Log10(power/float64(c.Samples)), float64(clipped)/float64(c.Samples)), nil
}
