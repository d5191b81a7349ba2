package main

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"quietband/ingest"
)

func init() {
	register("info", "describe captures: format, rates, centre, IF, levels, power, clipping, front-end faults", runInfo)
}

// optFloat is a flag that remembers whether it was given: raw-file
// settings have no defaults (a rate or a centre is stated or unknown).
type optFloat struct {
	v   float64
	set bool
}

func (o *optFloat) String() string {
	if o == nil || !o.set {
		return ""
	}
	return strconv.FormatFloat(o.v, 'g', -1, 64)
}

func (o *optFloat) Set(s string) error {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return fmt.Errorf("want a number (e.g. 4e6), got %q", s)
	}
	o.v, o.set = v, true
	return nil
}

// rawFlags are the settings raw files need, shared by every command that
// reads captures.
type rawFlags struct {
	format   *string
	rate     *optFloat
	center   *optFloat
	ifHz     *optFloat
	loSide   *string
	pattern  *string
	spectrum *string
}

func addRawFlags(fs *flag.FlagSet) rawFlags {
	r := rawFlags{rate: &optFloat{}, center: &optFloat{}, ifHz: &optFloat{}}
	r.format = fs.String("format", "", "sample format of raw files, a SigMF datatype: complex ci8, cu8, ci16_le, ci16_be, cf32_le, ... or real ri8, ri16_le, rf32_le, ... (default: from the file's ending: .ci8, .cs8, .cu8, .ci16, .cs16, .sc16, .cf32, .fc32, .ri8 ...; a file named here takes any name once this is given)")
	fs.Var(r.rate, "rate", "sample rate of raw files in `samples/s` of the file (real values per second for real formats); no default: a raw file without it is refused")
	fs.Var(r.center, "center", "RF centre frequency of raw files in `Hz`: the frequency at 0 Hz of the analysed stream, for real formats the RF of the IF band's centre (LO + IF on a low-side LO); no default: omitted or 0, the centre is unknown")
	fs.Var(r.ifHz, "if", "real formats: the IF in `Hz`, the centre of the wanted band in the real signal (e.g. 3e6); the real samples are turned into complex baseband at half the rate; no default: a real file without it is refused")
	r.loSide = fs.String("lo-side", "", "real formats: low (RF = LO + IF, spectrum upright) or high (RF = LO − IF, spectrum inverted); no default")
	r.spectrum = fs.String("spectrum", "auto", "spectrum orientation of the captures: auto (decided from the satellites), upright, or inverted (a recorder that swaps I and Q: the samples are conjugated before analysis, so emitters' offsets and the satellites are upright from the first capture on)")
	r.pattern = fs.String("pattern", "", "in folders, file names (a glob such as '*.bin' or 'cap_*') taken as raw captures besides those with a format ending; sidecars (.json, .txt, .sigmf-meta ...) never")
	return r
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
	var s ingest.RawSettings
	if *r.format != "" {
		f, err := ingest.ParseFormat(*r.format)
		if err != nil {
			return s, fmt.Errorf("--format: %w", err)
		}
		s.Format = f
	}
	if r.rate.set {
		if !(r.rate.v > 0 && r.rate.v <= ingest.MaxSampleRate) {
			return s, fmt.Errorf("--rate %g: want samples per second > 0 and ≤ %g", r.rate.v, float64(ingest.MaxSampleRate))
		}
		s.SampleRate = r.rate.v
	}
	if r.center.set && r.center.v != 0 {
		if math.IsNaN(r.center.v) || math.IsInf(r.center.v, 0) {
			return s, fmt.Errorf("--center %g: want a frequency in Hz", r.center.v)
		}
		s.CenterHz, s.HasCenter = r.center.v, true
	}
	if r.ifHz.set {
		if !(r.ifHz.v > 0) || math.IsInf(r.ifHz.v, 0) {
			return s, fmt.Errorf("--if %g: want the IF in Hz, > 0", r.ifHz.v)
		}
		s.IFHz = r.ifHz.v
	}
	if *r.loSide != "" {
		side, err := ingest.ParseLOSide(*r.loSide)
		if err != nil {
			return s, fmt.Errorf("--lo-side: %w", err)
		}
		s.LOSide = side
	}
	o, err := ingest.ParseOrientation(*r.spectrum)
	if err != nil {
		return s, fmt.Errorf("--spectrum: %w", err)
	}
	s.Spectrum = o
	if *r.pattern != "" {
		if _, err := filepath.Match(*r.pattern, ""); err != nil {
			return s, fmt.Errorf("--pattern %q: %w", *r.pattern, err)
		}
		s.Pattern = *r.pattern
	}
	return s, nil
}

func runInfo(args []string, out, errOut io.Writer) error {
	fs := newFlags("info", "PATH...", `
Describes each capture found in the given files and folders (recursively):
the sample format; the file's rate and the analysed rate (for real-valued
samples, the complex baseband made of them at half the rate, with the IF
and LO side); the centre frequency or "unknown"; the start time and
duration; the quantization levels when the samples take only a 1-, 2- or
3-bit quantizer's values; the mean power in dBFS and, for 2- and 3-bit
data, the input level from the magnitude bit's occupancy; the fraction of
clipped samples; and a fault line when the front end, not the sky,
explains the samples (dead, stuck, gaps of zeros, unnormalised floats).
The whole file is read. Raw files have no default rate or centre: give
them (--rate, --center; --if and --lo-side for real formats). A capture
that cannot be read gets a line saying why, and the exit status is 1.`, errOut)
	raw := addRawFlags(fs)
	settings, err := parsePathArgs(fs, args, raw)
	if err != nil {
		return err
	}
	found, err := ingest.FindRaw(settings, fs.Args()...)
	if err != nil {
		return err
	}
	bad := 0
	for _, f := range found {
		text, err := describe(f, settings)
		if err != nil {
			bad++
			fmt.Fprintf(out, "BAD  %v\n", err)
			continue
		}
		fmt.Fprint(out, text)
	}
	if bad > 0 {
		return exitCode(1)
	}
	return nil
}

// describe reads a capture and says what it is, one "key value" line per
// property under an "OK   path" line.
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
	r.CheckFrontEnd()
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
	fe, _ := r.FrontEnd()
	levels := r.Levels()

	var b strings.Builder
	line := func(key, format string, args ...any) {
		fmt.Fprintf(&b, "     %-10s %s\n", key, fmt.Sprintf(format, args...))
	}
	fmt.Fprintf(&b, "OK   %s\n", c.Name)
	if c.Format.IsReal() {
		line("format", "%s (real-valued): %d samples at %s in the file", c.Format, c.FileSamples, msps(c.FileSampleRate))
		lo := "unknown"
		if hz, ok := c.CenterHz(); ok {
			l := hz - c.IF.IFHz
			if c.IF.Side == ingest.HighSide {
				l = hz + c.IF.IFHz
			}
			lo = fmt.Sprintf("%.6f MHz", l/1e6)
		}
		rule := "RF = LO + IF, upright"
		if c.IF.Side == ingest.HighSide {
			rule = "RF = LO − IF, inverted and turned upright"
		}
		line("analysed", "%d complex samples at %s (mixed down from the IF, half-band filtered, decimated by %d)", c.Samples, msps(c.SampleRate), c.Decimation)
		line("IF", "%.6g MHz, %s-side LO at %s (%s)", c.IF.IFHz/1e6, c.IF.Side, lo, rule)
	} else {
		line("format", "%s (complex): %d samples at %s", c.Format, c.Samples, msps(c.SampleRate))
	}
	switch c.Spectrum {
	case ingest.OrientationInverted:
		line("spectrum", "inverted (--spectrum or the input's spectrum): I and Q swapped, the samples conjugated before analysis")
	case ingest.OrientationUpright:
		line("spectrum", "upright (--spectrum or the input's spectrum): not tested from the satellites")
	}
	if hz, ok := c.CenterHz(); ok {
		line("centre", "%.6f MHz", hz/1e6)
	} else {
		line("centre", "unknown")
	}
	switch t := c.Start(); {
	case t.IsZero():
		line("start", "unknown")
	case c.Meta == nil && settings.Start.IsZero():
		line("start", "%s (the file's modification time less its duration)", t.Format(time.RFC3339Nano))
	default:
		line("start", "%s", t.Format(time.RFC3339Nano))
	}
	line("duration", "%.6g s", c.Duration().Seconds())
	line("levels", "%s", levels)
	line("power", "%.2f dBFS (mean |x|² of the analysed samples)", 10*math.Log10(power/float64(c.Samples)))
	if fe.HasOccupancy {
		db, sat := ingest.OccupancyLevelDB(fe.Occupancy)
		note := ""
		if sat {
			note = fmt.Sprintf("; saturated: beyond p = %.2f the estimate runs away", ingest.OccupancySaturation)
		}
		line("level", "%+.2f dB from the magnitude bit's occupancy p = %.4f (σ/T of a Gaussian input; 0 dB when σ equals the threshold)%s", db, fe.Occupancy, note)
	} else if levels.LowBit() {
		line("level", "not measurable: %s has no symmetric magnitude bit", levels)
	}
	unit := "samples"
	if c.Format.IsReal() {
		unit = "complex samples with a saturated real sample"
	}
	line("clip", "%.2e of %s", float64(clipped)/float64(c.Samples), unit)
	if fe.Fault.Kind != "" {
		line("fault", "%s: %s", fe.Fault.Kind, fe.Fault.Detail)
	}
	return b.String(), nil
}

func msps(fs float64) string { return strconv.FormatFloat(fs/1e6, 'g', 7, 64) + " MS/s" }
