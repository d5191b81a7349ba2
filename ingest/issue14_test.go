package ingest

// Issue 14 ("Real recorders ..."): raw files under the names recorders
// give them, and front-end faults read from files through Open and the
// Reader, as the pipeline reads them. Each refusal is a *CaptureError that
// names the file and the setting to give; each fault has its kind and a
// detail that names the sample range or the values.

import (
	"errors"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestIssue14RawFileNames: the endings issue 14 found refused (.bin,
// .dat, .iq, .raw, .cs8, .cs16, .sc16) and names without an ending. With
// the format given, every one opens and reads its samples; without it,
// .cs8, .cs16 and .sc16 (the usual names of ci8 and ci16_le data) open
// from their ending, and the others are refused with an error naming the
// file and --format / the input's format, never read as something else;
// a format given and no rate is refused naming the file and --rate /
// sample_rate (DESIGN.md "Inputs": never guessed).
func TestIssue14RawFileNames(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(1410, 1))
	samples := randSamples(rng, 500, 0.5)
	for _, tc := range []struct {
		name    string
		written Format
		ending  bool // the format follows from the ending
	}{
		{"rec.bin", CI8, false}, {"rec.dat", CI16LE, false}, {"rec.iq", CF32LE, false}, {"rec.raw", CU8, false},
		{"rec.cs8", CI8, true}, {"rec.cs16", CI16LE, true}, {"rec.sc16", CI16LE, true}, {"cap_0001", CI8, false},
		{"L1 2021-12-02 08.47.00", CI16LE, false},
	} {
		path := filepath.Join(dir, tc.name)
		w, err := CreateRaw(path, tc.written)
		if err != nil {
			t.Fatal(err)
		}
		w.Write(samples)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		// The format given: any name.
		c, err := Open(path, RawSettings{Format: tc.written, SampleRate: 2e6})
		if err != nil {
			t.Errorf("%s with its format: %v", tc.name, err)
		} else if got := readCapture(t, c); len(got) != len(samples) || c.Format != tc.written {
			t.Errorf("%s: %d samples as %s, wrote %d as %s", tc.name, len(got), c.Format, len(samples), tc.written)
		}
		// No format.
		c, err = Open(path, RawSettings{SampleRate: 2e6})
		if tc.ending {
			if err != nil || c.Format != tc.written {
				t.Errorf("%s without a format: %v, %v; want %s from the ending", tc.name, c, err, tc.written)
			}
		} else {
			wantRefusal(t, tc.name+" without a format", err, path, "--format", "input's format")
		}
		// No rate.
		_, err = Open(path, RawSettings{Format: tc.written})
		wantRefusal(t, tc.name+" without a rate", err, path, "no sample rate", "--rate", "sample_rate")
	}
}

// readCapture reads a capture's samples.
func readCapture(t *testing.T, c *Capture) []complex64 {
	t.Helper()
	r, err := c.NewReader(128)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got, _, _, err := readBlocks(r)
	if err != nil {
		t.Fatal(err)
	}
	return got
}

// wantRefusal checks that err is a *CaptureError naming file and saying
// each of says.
func wantRefusal(t *testing.T, what string, err error, file string, says ...string) {
	t.Helper()
	var ce *CaptureError
	if !errors.As(err, &ce) {
		t.Errorf("%s: error %v (%T), want a *CaptureError", what, err, err)
		return
	}
	if ce.File != file || !strings.HasPrefix(err.Error(), file+": ") {
		t.Errorf("%s: error names %q, want %q: %v", what, ce.File, file, err)
	}
	for _, s := range says {
		if !strings.Contains(err.Error(), s) {
			t.Errorf("%s: error %q does not say %q", what, err, s)
		}
	}
}

// TestIssue14FrontEndFaultFiles: the broken front ends of issue 14 as
// files, read through Open, a Reader with CheckFrontEnd and its blocks
// (blocks of 4096, so that runs cross block boundaries): an all-zero ci8
// capture (dead), a constant ci16 one (stuck), a cf32 capture of 8-bit
// converter codes stored as floats without scaling (issue 14's real case
// read as +48 dBFS with clip fraction 1.0: unnormalised, with every
// sample counted clipped), a ci16 capture with a zero-filled buffer
// (gap, its file-sample range named), a real ri8 IF capture with a
// zero run (gap, in real file samples, as a SigMF recording with its IF
// declared), and a live 2-bit capture (no fault, its levels said). The
// thresholds are ingest's (DefaultMinGap 64, UnnormalisedRMS 4,
// UnnormalisedPeak 100: common practice, see frontend.go); the numbers
// in each detail are computed from the data written.
func TestIssue14FrontEndFaultFiles(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(1411, 1))
	noise := func(n int, sigma float64) []complex64 {
		x := make([]complex64, n)
		for i := range x {
			x[i] = complex(float32(sigma*rng.NormFloat64()), float32(sigma*rng.NormFloat64()))
		}
		return x
	}
	writeRaw := func(name string, f Format, x []complex64) string {
		p := filepath.Join(dir, name)
		w, err := CreateRaw(p, f)
		if err != nil {
			t.Fatal(err)
		}
		w.Write(x)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		return p
	}
	// 8-bit codes as floats: integers in ±127, RMS about 30.
	codes := make([]complex64, 20000)
	for i := range codes {
		codes[i] = complex(float32(math.Round(max(-127, min(127, 30*rng.NormFloat64())))), float32(math.Round(max(-127, min(127, 30*rng.NormFloat64())))))
	}
	gappy := noise(40000, 0.05)
	clear(gappy[12000:14048])
	twoBit := make([]complex64, 20000)
	for i := range twoBit {
		lv := func() float32 { return float32([]int{-3, -1, 1, 3}[rng.IntN(4)]) / 127 }
		twoBit[i] = complex(lv(), lv())
	}
	// ri8 at an IF of fs/4 with a run of 500 zero real samples.
	real := make([]float32, 30001)
	for i := range real {
		real[i] = float32(0.2 * rng.NormFloat64())
	}
	clear(real[7001:7501])
	base := filepath.Join(dir, "if")
	sw, err := CreateSigMF(base, SigMFHeader{Format: RI8, SampleRate: 12e6, CenterHz: 1575.42e6, HasCenter: true, IF: IFConversion{3e6, LowSide}})
	if err != nil {
		t.Fatal(err)
	}
	if err := sw.WriteReal(real); err != nil {
		t.Fatal(err)
	}
	if err := sw.Close(); err != nil {
		t.Fatal(err)
	}

	for _, tc := range []struct {
		name    string
		path    string
		raw     RawSettings
		kind    string
		detail  []string
		gaps    []Gap
		clipped float64 // fraction of samples counted clipped, −1: not checked
	}{
		{"dead ci8", writeRaw("dead.ci8", CI8, make([]complex64, 10000)), RawSettings{SampleRate: 4e6}, FaultDead,
			[]string{"all 10000 samples", "exactly zero"}, nil, 0},
		{"stuck ci16", writeRaw("stuck.ci16", CI16LE, slices.Repeat([]complex64{complex(0.25, -0.5)}, 10000)), RawSettings{SampleRate: 4e6}, FaultStuck,
			[]string{"all 10000 samples", "same value"}, nil, 0},
		{"unnormalised cf32", writeRaw("codes.cf32", CF32LE, codes), RawSettings{SampleRate: 4e6}, FaultUnnormalised,
			[]string{"RMS 4", "limits RMS 4, peak 100", "integer codes stored as floats"}, nil, 0.99},
		{"gap ci16", writeRaw("gap.ci16", CI16LE, gappy), RawSettings{SampleRate: 4e6}, FaultGap,
			[]string{"1 run(s)", "2048 samples", "samples 12000–14047"}, []Gap{{12000, 2048}}, 0},
		{"gap ri8 SigMF", base + MetaExt, RawSettings{}, FaultGap,
			[]string{"real samples 7001–7500"}, []Gap{{7001, 500}}, -1},
		{"live 2-bit ci8", writeRaw("live.ci8", CI8, twoBit), RawSettings{SampleRate: 4e6}, "", nil, nil, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			c, err := Open(tc.path, tc.raw)
			if err != nil {
				t.Fatal(err)
			}
			r, err := c.NewReader(4096)
			if err != nil {
				t.Fatal(err)
			}
			r.CheckFrontEnd()
			var clipped, n int
			for {
				b, err := r.Next()
				if err != nil {
					break
				}
				clipped += b.Clipped
				n += len(b.Samples)
			}
			fe, ok := r.FrontEnd()
			r.Close()
			if !ok {
				t.Fatal("no front-end check")
			}
			if fe.Fault.Kind != tc.kind {
				t.Fatalf("fault %+v, want %q", fe.Fault, tc.kind)
			}
			for _, d := range tc.detail {
				if !strings.Contains(fe.Fault.Detail, d) {
					t.Errorf("detail %q does not say %q", fe.Fault.Detail, d)
				}
			}
			if tc.gaps != nil && !slices.Equal(fe.Gaps, tc.gaps) {
				t.Errorf("gaps %v, want %v", fe.Gaps, tc.gaps)
			}
			if tc.clipped > 0 && float64(clipped) < tc.clipped*float64(n) {
				t.Errorf("%d of %d samples counted clipped, want ≥ %.0f %%", clipped, n, 100*tc.clipped)
			}
			if tc.clipped == 0 && clipped != 0 {
				t.Errorf("%d samples counted clipped", clipped)
			}
			if tc.kind == "" && (fe.Levels.Bits() != 2 || !fe.HasOccupancy) {
				t.Errorf("live 2-bit capture: levels %v (%d bits), occupancy %v", fe.Levels, fe.Levels.Bits(), fe.HasOccupancy)
			}
			t.Logf("%s: fault %q %q; %d of %d samples clipped; levels %v", tc.name, fe.Fault.Kind, fe.Fault.Detail, clipped, n, fe.Levels)
		})
	}
}
