package ingest

import (
	"bytes"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func randSamples(rng *rand.Rand, n int, amp float64) []complex64 {
	s := make([]complex64, n)
	for i := range s {
		s[i] = complex(float32(amp*(2*rng.Float64()-1)), float32(amp*(2*rng.Float64()-1)))
	}
	return s
}

// writeSigMF writes samples as a SigMF pair at base and returns the data
// path.
func writeSigMF(t *testing.T, base string, h SigMFHeader, samples []complex64) string {
	t.Helper()
	w, err := CreateSigMF(base, h)
	if err != nil {
		t.Fatal(err)
	}
	// Two writes of uneven size, as a recorder would do.
	half := len(samples) / 3
	if err := w.Write(samples[:half]); err != nil {
		t.Fatal(err)
	}
	if err := w.Write(samples[half:]); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return base + DataExt
}

// readBlocks streams a capture and returns its samples, the Block.Start of
// every block, the block lengths and the error that ended the stream
// (nil for io.EOF).
func readBlocks(r *Reader) (samples []complex64, starts []int64, lens []int, err error) {
	for {
		b, err := r.Next()
		if err == io.EOF {
			return samples, starts, lens, nil
		}
		if err != nil {
			return samples, starts, lens, err
		}
		samples = append(samples, b.Samples...)
		starts = append(starts, b.Start)
		lens = append(lens, len(b.Samples))
	}
}

// quantTol is the largest round-trip error of f: half a code (rounding to
// the nearest code) plus the float32 resolution, 0 for floats.
func quantTol(f Format) float64 {
	if isFloat(f) {
		return 0
	}
	return 0.5/integerCodes[f].scale + 0x1p-24
}

// TestOpenSigMF writes a recording with CreateSigMF in every format, opens
// it and streams it back in blocks of 64 samples over 1000 (15 full blocks
// and a short one of 40).
func TestOpenSigMF(t *testing.T) {
	const n, block = 1000, 64
	start := time.Date(2024, 3, 1, 12, 0, 0, 123456789, time.UTC)
	rng := rand.New(rand.NewPCG(3, 4))
	for _, f := range Formats() {
		t.Run(f.String(), func(t *testing.T) {
			want := randSamples(rng, n, 0.9)
			base := filepath.Join(t.TempDir(), "rec-"+f.String())
			h := SigMFHeader{Format: f, SampleRate: 2.046e6, CenterHz: 1575.42e6, HasCenter: true, Start: start,
				Description: "test", Author: "tests", HW: "none"}
			dataPath := writeSigMF(t, base, h, want)

			for _, path := range []string{base + MetaExt, base + DataExt} {
				c, err := Open(path, RawSettings{})
				if err != nil {
					t.Fatalf("Open(%s): %v", path, err)
				}
				if c.Format != f || c.SampleRate != 2.046e6 || c.Samples != n || c.DataBytes != int64(n*f.SampleBytes()) ||
					c.DataPath != dataPath || c.MetaPath != base+MetaExt || c.Name != path || c.Meta == nil {
					t.Errorf("Open(%s) = %+v", path, c)
				}
				if hz, ok := c.CenterHz(); !ok || hz != 1575.42e6 || !c.Start().Equal(start) || len(c.Segments) != 1 || c.Segments[0].SampleStart != 0 {
					t.Errorf("segments %+v", c.Segments)
				}
				// Duration = N / fs.
				if d := c.Duration(); math.Abs(d.Seconds()-n/2.046e6) > 1e-9 {
					t.Errorf("Duration %v, want %gs", d, n/2.046e6)
				}
			}

			c, err := Open(base+MetaExt, RawSettings{})
			if err != nil {
				t.Fatal(err)
			}
			r, err := c.NewReader(block)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			got, starts, lens, err := readBlocks(r)
			if err != nil {
				t.Fatalf("reading: %v", err)
			}
			if len(got) != n {
				t.Fatalf("read %d samples, want %d", len(got), n)
			}
			tol := quantTol(f)
			for i := range got {
				if math.Abs(float64(real(got[i]-want[i]))) > tol || math.Abs(float64(imag(got[i]-want[i]))) > tol {
					t.Fatalf("sample %d = %v, wrote %v (tolerance %g)", i, got[i], want[i], tol)
				}
			}
			if len(starts) != 16 || lens[15] != n-15*block {
				t.Errorf("%d blocks, last of %d, want 16 and %d", len(starts), lens[len(lens)-1], n-15*block)
			}
			for i, s := range starts {
				if s != int64(i*block) || (i < 15 && lens[i] != block) {
					t.Errorf("block %d: Start %d len %d, want %d and %d", i, s, lens[i], i*block, block)
				}
			}
			// After the end, Next keeps returning io.EOF.
			if _, err := r.Next(); err != io.EOF {
				t.Errorf("Next after the end: %v, want io.EOF", err)
			}

			data, err := os.ReadFile(dataPath)
			if err != nil {
				t.Fatal(err)
			}
			// FIPS 180-4 digests, computed by Go's crypto packages.
			if sum := sha256.Sum256(data); r.SHA256() != hex.EncodeToString(sum[:]) {
				t.Errorf("SHA256() = %s, want %x", r.SHA256(), sum)
			}
			if sum := sha512.Sum512(data); c.Meta.Global.SHA512 != hex.EncodeToString(sum[:]) {
				t.Errorf("core:sha512 = %s, want %x", c.Meta.Global.SHA512, sum)
			}
			if g := c.Meta.Global; g.Version != SigMFVersion || g.Datatype != f.String() || g.Recorder != "quietband" ||
				g.Description != "test" || g.Author != "tests" || g.HW != "none" {
				t.Errorf("written global %+v", g)
			}
		})
	}
}

// TestWriterClipped checks that the Writer counts saturated samples and
// that Clipped in the blocks read back agrees.
func TestWriterClipped(t *testing.T) {
	base := filepath.Join(t.TempDir(), "clip")
	w, err := CreateSigMF(base, SigMFHeader{Format: CI16LE, SampleRate: 1e6})
	if err != nil {
		t.Fatal(err)
	}
	src := []complex64{0.5, 1.5, complex(0, -2), 0.25i, complex(-0.5, 0.5)}
	if err := w.Write(src); err != nil {
		t.Fatal(err)
	}
	if w.Samples() != 5 || w.Clipped() != 2 || w.DataPath() != base+DataExt {
		t.Errorf("Samples %d Clipped %d DataPath %s, want 5, 2, %s", w.Samples(), w.Clipped(), w.DataPath(), base+DataExt)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
	if err := w.Write(src); err == nil {
		t.Error("Write after Close succeeded")
	}
	c, err := Open(base+DataExt, RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	r, _ := c.NewReader(16)
	defer r.Close()
	b, err := r.Next()
	if err != nil || b.Clipped != 2 || len(b.Samples) != 5 {
		t.Errorf("block %+v, %v; want 5 samples, 2 clipped", b, err)
	}
	// No centre given: no core:frequency and no core:datetime.
	if _, ok := c.CenterHz(); ok || !c.Start().IsZero() {
		t.Errorf("segments %+v, want no centre and no time", c.Segments)
	}
}

// TestCreateErrors checks that the writers refuse what the reader would
// refuse (SigMF 1.2.6: core:sample_rate > 0; MaxSampleRate).
func TestCreateErrors(t *testing.T) {
	dir := t.TempDir()
	cases := []struct {
		name string
		fn   func() error
		want string
	}{
		{"invalid format", func() error { _, err := CreateSigMF(filepath.Join(dir, "a"), SigMFHeader{SampleRate: 1}); return err }, "invalid format"},
		{"rate 0", func() error { _, err := CreateSigMF(filepath.Join(dir, "b"), SigMFHeader{Format: CI8}); return err }, "sample rate"},
		{"rate 1e15", func() error {
			_, err := CreateSigMF(filepath.Join(dir, "c"), SigMFHeader{Format: CI8, SampleRate: 1e15})
			return err
		}, "sample rate"},
		{"raw invalid format", func() error { _, err := CreateRaw(filepath.Join(dir, "d.ci8"), Format(99)); return err }, "invalid format"},
		{"no folder", func() error { _, err := CreateRaw(filepath.Join(dir, "none", "e.ci8"), CI8); return err }, "no such file"},
	}
	for _, tc := range cases {
		if err := tc.fn(); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want an error mentioning %q", tc.name, err, tc.want)
		}
	}
}

// TestOpenSegments rewrites the metadata of a recording with several
// capture segments and checks the segment bookkeeping: SigMF captures
// apply from their core:sample_start to the next one's, and samples before
// the first segment have no stated parameters.
func TestOpenSegments(t *testing.T) {
	const n, fs = 3000, 1e3
	base := filepath.Join(t.TempDir(), "segs")
	writeSigMF(t, base, SigMFHeader{Format: CI8, SampleRate: fs}, randSamples(rand.New(rand.NewPCG(5, 6)), n, 0.5))
	m := parseFile(t, base+MetaExt)
	t0 := time.Date(2022, 1, 2, 3, 4, 5, 0, time.UTC)
	t1 := time.Date(2022, 1, 2, 3, 9, 0, 0, time.UTC) // retuned and restarted later
	m.Captures = []CaptureSegment{
		{SampleStart: 500, Frequency: 1575.42e6, HasFrequency: true, Datetime: t0},
		{SampleStart: 2000, Frequency: 1176.45e6, HasFrequency: true, Datetime: t1},
	}
	if err := WriteMeta(base+MetaExt, m); err != nil {
		t.Fatal(err)
	}
	c, err := Open(base+MetaExt, RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	want := []Segment{{}, {500, 1575.42e6, true, t0}, {2000, 1176.45e6, true, t1}}
	if len(c.Segments) != len(want) {
		t.Fatalf("segments %+v, want %+v", c.Segments, want)
	}
	for i := range want {
		g := c.Segments[i]
		if g.SampleStart != want[i].SampleStart || g.CenterHz != want[i].CenterHz || g.HasCenter != want[i].HasCenter || !g.Start.Equal(want[i].Start) {
			t.Errorf("segment %d = %+v, want %+v", i, g, want[i])
		}
	}
	times := []struct {
		n    int64
		seg  int64
		want time.Time
	}{
		{0, 0, time.Time{}},
		{499, 0, time.Time{}},
		{500, 500, t0},
		{1999, 500, t0.Add(1499 * time.Millisecond)}, // (1999−500)/fs
		{2000, 2000, t1},
		{2999, 2000, t1.Add(999 * time.Millisecond)},
	}
	for _, tc := range times {
		if s := c.SegmentAt(tc.n); s.SampleStart != tc.seg {
			t.Errorf("SegmentAt(%d) starts at %d, want %d", tc.n, s.SampleStart, tc.seg)
		}
		if got := c.SampleTime(tc.n); !got.Equal(tc.want) {
			t.Errorf("SampleTime(%d) = %v, want %v", tc.n, got, tc.want)
		}
	}
}

// TestSHA512Mismatch alters one byte of a recording's data: the Reader
// delivers every block and then reports the core:sha512 mismatch at the
// end.
func TestSHA512Mismatch(t *testing.T) {
	const n = 500
	base := filepath.Join(t.TempDir(), "tamper")
	data := writeSigMF(t, base, SigMFHeader{Format: CF32LE, SampleRate: 1e6}, randSamples(rand.New(rand.NewPCG(7, 8)), n, 0.5))
	cases := []struct {
		name   string
		offset int64
		wantOK bool
	}{
		{"intact", -1, true},
		{"first byte", 0, false},
		{"middle byte", 1234, false},
		{"last byte", n*8 - 1, false},
	}
	orig, _ := os.ReadFile(data)
	for _, tc := range cases {
		mod := bytes.Clone(orig)
		if tc.offset >= 0 {
			mod[tc.offset] ^= 0x01 // a float32 bit flip, still finite
		}
		if err := os.WriteFile(data, mod, 0o644); err != nil {
			t.Fatal(err)
		}
		c, err := Open(base+MetaExt, RawSettings{})
		if err != nil {
			t.Fatalf("%s: Open: %v", tc.name, err)
		}
		r, _ := c.NewReader(128)
		got, _, _, err := readBlocks(r)
		r.Close()
		if len(got) != n {
			t.Errorf("%s: %d samples delivered before the end, want %d", tc.name, len(got), n)
		}
		if tc.wantOK {
			if err != nil {
				t.Errorf("%s: %v", tc.name, err)
			}
			continue
		}
		var ce *CaptureError
		if !errors.As(err, &ce) || ce.File != data || !strings.Contains(err.Error(), "SHA-512") || !strings.Contains(err.Error(), "core:sha512") {
			t.Errorf("%s: error %v, want a *CaptureError for %s naming SHA-512", tc.name, err, data)
		}
	}
}

// TestOpenRaw opens raw files whose format comes from the extension or
// from the settings.
func TestOpenRaw(t *testing.T) {
	dir := t.TempDir()
	start := time.Date(2024, 5, 6, 7, 8, 9, 0, time.UTC)
	cases := []struct {
		file     string
		write    Format
		settings RawSettings
		want     Format
	}{
		{"a.ci16", CI16LE, RawSettings{SampleRate: 4e6, CenterHz: 1575.42e6, HasCenter: true, Start: start}, CI16LE},
		{"b.cu8", CU8, RawSettings{SampleRate: 2.4e6, Start: start}, CU8},
		{"c.cf32", CF32LE, RawSettings{SampleRate: 1e6, Start: start}, CF32LE},
		{"d.CI8", CI8, RawSettings{SampleRate: 1e6, Start: start}, CI8},
		{"e.ci16_be", CI16BE, RawSettings{SampleRate: 1e6, Start: start}, CI16BE},
		{"f.dat", CF32BE, RawSettings{Format: CF32BE, SampleRate: 5e6, Start: start}, CF32BE},
		// Settings win over the extension.
		{"g.ci16", CI8, RawSettings{Format: CI8, SampleRate: 1e6, Start: start}, CI8},
	}
	rng := rand.New(rand.NewPCG(9, 10))
	for _, tc := range cases {
		path := filepath.Join(dir, tc.file)
		samples := randSamples(rng, 777, 0.7)
		w, err := CreateRaw(path, tc.write)
		if err != nil {
			t.Fatal(err)
		}
		w.Write(samples)
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		c, err := Open(path, tc.settings)
		if err != nil {
			t.Errorf("%s: %v", tc.file, err)
			continue
		}
		if c.Format != tc.want || c.Samples != 777 || c.SampleRate != tc.settings.SampleRate || c.Meta != nil || c.MetaPath != "" ||
			len(c.Segments) != 1 || !c.Start().Equal(start) || c.Segments[0].HasCenter != tc.settings.HasCenter || c.Segments[0].CenterHz != tc.settings.CenterHz {
			t.Errorf("%s: %+v", tc.file, c)
		}
		r, _ := c.NewReader(100)
		got, _, _, err := readBlocks(r)
		r.Close()
		if err != nil || len(got) != 777 {
			t.Errorf("%s: read %d samples, %v", tc.file, len(got), err)
			continue
		}
		if tc.write == tc.want {
			tol := quantTol(tc.want)
			for i := range got {
				if math.Abs(float64(real(got[i]-samples[i]))) > tol || math.Abs(float64(imag(got[i]-samples[i]))) > tol {
					t.Errorf("%s: sample %d = %v, wrote %v", tc.file, i, got[i], samples[i])
					break
				}
			}
		}
	}

	// Start unknown: the file's modification time less the duration (the
	// recorder closed the file after its last sample). 1000 samples at
	// 1 kS/s = 1 s.
	path := filepath.Join(dir, "mtime.ci8")
	if err := os.WriteFile(path, make([]byte, 2000), 0o644); err != nil {
		t.Fatal(err)
	}
	mtime := time.Date(2024, 3, 1, 12, 0, 0, 0, time.UTC)
	if err := os.Chtimes(path, mtime, mtime); err != nil {
		t.Fatal(err)
	}
	c, err := Open(path, RawSettings{SampleRate: 1e3})
	if err != nil {
		t.Fatal(err)
	}
	if want := mtime.Add(-time.Second); !c.Start().Equal(want) {
		t.Errorf("raw start %v, want %v", c.Start(), want)
	}
}

// TestIsCaptureFile checks the file names Open takes: the two files of a
// SigMF recording (SigMF 1.2.6 additional_content.md, "Files") and raw
// files with a datatype ending; archives, collections and sidecars are
// not, even when a pattern matches them; a pattern adds any other name,
// the common raw-data endings (.bin ...) among them.
func TestIsCaptureFile(t *testing.T) {
	cases := map[string]bool{
		"a.sigmf-meta": true, "a.sigmf-data": true, "A.SIGMF-META": true, "x.ci16": true, "x.cu8": true,
		"x.cf32_be": true, "x.ri8": true, "x.cs16": true, "x.bin": false, "x.DAT": false, "x.iq": false,
		"x": false, "x.sigmf": false, "x.sigmf-collection": false, "x.tmp": false,
		"x.truth.json": false, "x.json": false, "README.md": false, "LICENSE.txt": false,
	}
	for name, want := range cases {
		if got := IsCaptureFile(filepath.Join("/d", name)); got != want {
			t.Errorf("IsCaptureFile(%q) = %v, want %v", name, got, want)
		}
	}
	pat := RawSettings{Pattern: "cap_*"}
	for name, want := range map[string]bool{"cap_001": true, "cap_1.u8": true, "other": false, "cap_1.truth.json": false,
		"cap_1.sigmf-meta": true, "x.bin": false, "cap_1.bin": true, "cap_notes.txt": false} {
		if got := pat.IsCapture(filepath.Join("/d", name)); got != want {
			t.Errorf("pattern cap_*: IsCapture(%q) = %v, want %v", name, got, want)
		}
	}
	for name, want := range map[string]bool{"x.bin": true, "x.RAW": true, "x.iq": true, "x.dat": true, "x.ci8": false, "x.json": false} {
		if HasRawDataEnding(name) != want {
			t.Errorf("HasRawDataEnding(%q) = %v", name, !want)
		}
	}
}

// writePair writes a metadata document and a data file of the given size
// (zeros) under base and returns the metadata path.
func writePair(t *testing.T, base, meta string, dataBytes int) string {
	t.Helper()
	if err := os.WriteFile(base+MetaExt, []byte(meta), 0o644); err != nil {
		t.Fatal(err)
	}
	if dataBytes >= 0 {
		if err := os.WriteFile(base+DataExt, make([]byte, dataBytes), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return base + MetaExt
}

func ci16Meta(extraGlobal, captures, annotations string) string {
	return metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 1e6`+extraGlobal, captures, annotations)
}

// TestOpenErrors feeds one broken capture per case and checks that Open
// reports a *CaptureError naming the right file and the problem. The
// rules are SigMF 1.2.6's (required core:datatype, the datatype ABNF,
// core:sample_rate > 0, a conforming dataset holds whole samples only and
// captures/annotations index into it) plus DESIGN.md's (a capture without
// a sample rate cannot be analysed).
func TestOpenErrors(t *testing.T) {
	type setup func(t *testing.T, base string) (path string, raw RawSettings, file string)
	sigmf := func(meta string, dataBytes int, bad string) setup {
		return func(t *testing.T, base string) (string, RawSettings, string) {
			p := writePair(t, base, meta, dataBytes)
			if bad == "meta" {
				return p, RawSettings{}, base + MetaExt
			}
			return p, RawSettings{}, base + DataExt
		}
	}
	raw := func(ext string, size int, rs RawSettings) setup {
		return func(t *testing.T, base string) (string, RawSettings, string) {
			p := base + ext
			if err := os.WriteFile(p, make([]byte, size), 0o644); err != nil {
				t.Fatal(err)
			}
			return p, rs, p
		}
	}
	cases := []struct {
		name  string
		setup setup
		want  []string
	}{
		{"unknown datatype", sigmf(metaDoc(`"core:datatype": "cs16_le", "core:version": "1.2.6", "core:sample_rate": 1e6`, "", ""), 400, "meta"),
			[]string{"core:datatype", "unknown datatype", `"cs16_le"`}},
		{"real datatype without IF", sigmf(metaDoc(`"core:datatype": "rf32_le", "core:version": "1.2.6", "core:sample_rate": 1e6`, "", ""), 400, "meta"),
			[]string{"real-valued", "rf32_le", "IF is not known", "quietband:if_hz", "--if"}},
		{"real datatype without LO side", sigmf(metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": 250e3`, "", ""), 400, "meta"),
			[]string{"real-valued", "LO side is not known", "quietband:lo_side", "--lo-side"}},
		{"real datatype bad if_hz", sigmf(metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": "quarter"`, "", ""), 400, "meta"),
			[]string{"quietband:if_hz must be a positive number"}},
		{"real datatype bad lo_side", sigmf(metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": 250e3, "quietband:lo_side": "upper"`, "", ""), 400, "meta"),
			[]string{"quietband:lo_side", `"low" or "high"`, `"upper"`}},
		{"real datatype IF too low", sigmf(metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": 100e3, "quietband:lo_side": "low"`, "", ""), 400, "meta"),
			[]string{"IF 100000 Hz", "0.2–0.3"}},
		{"real datatype IF disagrees", func(t *testing.T, base string) (string, RawSettings, string) {
			p := writePair(t, base, metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": 250e3, "quietband:lo_side": "low"`, "", ""), 400)
			return p, RawSettings{IFHz: 260e3}, p
		}, []string{"quietband:if_hz says 250000 Hz", "--if", "260000 Hz"}},
		{"real datatype LO side disagrees", func(t *testing.T, base string) (string, RawSettings, string) {
			p := writePair(t, base, metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 1e6, "quietband:if_hz": 250e3, "quietband:lo_side": "low"`, "", ""), 400)
			return p, RawSettings{LOSide: HighSide}, p
		}, []string{"quietband:lo_side says low", "--lo-side", "high"}},
		{"missing datatype", sigmf(metaDoc(`"core:version": "1.2.6", "core:sample_rate": 1e6`, "", ""), 400, "meta"),
			[]string{"core:datatype is missing"}},
		{"missing rate", sigmf(metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6"`, "", ""), 400, "meta"),
			[]string{"core:sample_rate is missing"}},
		{"rate 0", sigmf(metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 0`, "", ""), 400, "meta"),
			[]string{"core:sample_rate 0", "out of range"}},
		{"rate negative", sigmf(metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": -2e6`, "", ""), 400, "meta"),
			[]string{"core:sample_rate -2e+06", "out of range"}},
		{"rate absurd", sigmf(metaDoc(`"core:datatype": "ci16_le", "core:version": "1.2.6", "core:sample_rate": 1e15`, "", ""), 400, "meta"),
			[]string{"core:sample_rate 1e+15", "out of range"}},
		{"offset", sigmf(ci16Meta(`, "core:offset": 10`, "", ""), 400, "meta"), []string{"core:offset 10"}},
		{"malformed JSON", sigmf(`{"global": {"core:datatype": "ci16_le",}}`, 400, "meta"), []string{"malformed JSON", "line 1 column 40"}},
		{"empty metadata", sigmf("", 400, "meta"), []string{"metadata file is empty"}},
		// ci16_le: 4 bytes a sample; 403 bytes leave 3 from offset 400.
		{"partial sample", sigmf(ci16Meta("", "", ""), 403, "data"), []string{"403 bytes", "not a whole number of ci16_le samples", "3 stray bytes", "byte offset 400"}},
		{"zero-length data", sigmf(ci16Meta("", "", ""), 0, "data"), []string{"empty", "zero length"}},
		{"missing data", sigmf(ci16Meta("", "", ""), -1, "data"), []string{"cannot read data", "no such file"}},
		{"missing metadata", func(t *testing.T, base string) (string, RawSettings, string) {
			os.WriteFile(base+DataExt, make([]byte, 400), 0o644)
			return base + DataExt, RawSettings{}, base + MetaExt
		}, []string{"cannot read metadata", "no such file"}},
		// 400 bytes = 100 samples.
		{"segment beyond the end", sigmf(ci16Meta("", `{"core:sample_start": 0}, {"core:sample_start": 100}`, ""), 400, "data"),
			[]string{"holds 100 samples", "captures[1] starts at sample 100", "shorter than the metadata"}},
		{"annotation beyond the end", sigmf(ci16Meta("", `{"core:sample_start": 0}`, `{"core:sample_start": 90, "core:sample_count": 11}`), 400, "data"),
			[]string{"annotations[0] reaches sample 101", "shorter than the metadata"}},
		{"annotation start beyond the end", sigmf(ci16Meta("", "", `{"core:sample_start": 10}, {"core:sample_start": 150}`), 400, "data"),
			[]string{"annotations[1] reaches sample 150"}},
		// 2^62 + 2^62 = 2^63 overflows int64: still beyond the end.
		{"annotation end overflows", sigmf(ci16Meta("", "", `{"core:sample_start": 4611686018427387904, "core:sample_count": 4611686018427387904}`), 400, "data"),
			[]string{"annotations[0]", "shorter than the metadata"}},
		{"data is a folder", func(t *testing.T, base string) (string, RawSettings, string) {
			os.WriteFile(base+MetaExt, []byte(ci16Meta("", "", "")), 0o644)
			os.Mkdir(base+DataExt, 0o755)
			return base + MetaExt, RawSettings{}, base + DataExt
		}, []string{"not a regular file"}},
		{"metadata is a folder", func(t *testing.T, base string) (string, RawSettings, string) {
			os.Mkdir(base+MetaExt, 0o755)
			os.WriteFile(base+DataExt, make([]byte, 400), 0o644)
			return base + DataExt, RawSettings{}, base + MetaExt
		}, []string{"is a directory"}},
		{"raw is a folder", func(t *testing.T, base string) (string, RawSettings, string) {
			os.Mkdir(base+".ci16", 0o755)
			return base + ".ci16", RawSettings{SampleRate: 1e6}, base + ".ci16"
		}, []string{"not a regular file"}},
		{"raw no format", raw(".bin", 400, RawSettings{SampleRate: 1e6}), []string{"no sample format", `".bin"`, "--format", "input's format"}},
		{"raw rate missing", raw(".ci16", 400, RawSettings{}), []string{"no sample rate", "--rate", "sample_rate"}},
		{"raw rate missing with format", raw(".bin", 400, RawSettings{Format: CI8}), []string{"no sample rate", "--rate", "sample_rate"}},
		{"raw real without IF", raw(".ri8", 400, RawSettings{SampleRate: 12e6}), []string{"real-valued", "ri8", "IF is not known", "--if", "if_hz"}},
		{"raw real without LO side", raw(".bin", 400, RawSettings{Format: RI16LE, SampleRate: 12e6, IFHz: 3e6}), []string{"real-valued", "ri16_le", "--lo-side", "lo_side"}},
		{"raw real IF beyond range", raw(".ri8", 400, RawSettings{SampleRate: 12e6, IFHz: 5e6, LOSide: LowSide}), []string{"IF 5e+06 Hz", "0.2–0.3"}},
		{"raw single real sample", raw(".ri8", 1, RawSettings{SampleRate: 12e6, IFHz: 3e6, LOSide: LowSide}), []string{"single real sample"}},
		{"raw sidecar with format", raw(".truth.json", 400, RawSettings{Format: CI8, SampleRate: 1e6}), []string{"sidecar", ".json"}},
		{"raw rate negative", raw(".ci16", 400, RawSettings{SampleRate: -1}), []string{"sample rate", "got -1"}},
		{"raw rate absurd", raw(".ci16", 400, RawSettings{SampleRate: 1e15}), []string{"sample rate", "got 1e+15"}},
		{"raw rate NaN", raw(".ci16", 400, RawSettings{SampleRate: math.NaN()}), []string{"sample rate", "got NaN"}},
		{"raw partial sample", raw(".cf32", 8*10+5, RawSettings{SampleRate: 1e6}), []string{"cf32_le", "5 stray bytes", "byte offset 80"}},
		{"raw zero length", raw(".cu8", 0, RawSettings{SampleRate: 1e6}), []string{"zero length"}},
		{"raw missing", func(t *testing.T, base string) (string, RawSettings, string) {
			return base + ".ci8", RawSettings{SampleRate: 1e6}, base + ".ci8"
		}, []string{"no such file"}},
	}
	if os.Geteuid() != 0 {
		// Root reads anything, so these only mean something for others.
		cases = append(cases, struct {
			name  string
			setup setup
			want  []string
		}{"unreadable data", func(t *testing.T, base string) (string, RawSettings, string) {
			p := writePair(t, base, ci16Meta("", "", ""), 400)
			os.Chmod(base+DataExt, 0)
			return p, RawSettings{}, base + DataExt
		}, []string{"cannot read data", "permission denied"}}, struct {
			name  string
			setup setup
			want  []string
		}{"unreadable metadata", func(t *testing.T, base string) (string, RawSettings, string) {
			p := writePair(t, base, ci16Meta("", "", ""), 400)
			os.Chmod(p, 0)
			return p, RawSettings{}, p
		}, []string{"cannot read metadata", "permission denied"}})
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			base := filepath.Join(t.TempDir(), "cap")
			path, rs, file := tc.setup(t, base)
			c, err := Open(path, rs)
			if err == nil {
				t.Fatalf("Open accepted it: %+v", c)
			}
			var ce *CaptureError
			if !errors.As(err, &ce) {
				t.Fatalf("error %v (%T) is not a *CaptureError", err, err)
			}
			if ce.File != file || !strings.HasPrefix(err.Error(), file+": ") {
				t.Errorf("error names %q, want %q: %v", ce.File, file, err)
			}
			for _, sub := range tc.want {
				if !strings.Contains(err.Error(), sub) {
					t.Errorf("error %q does not mention %q", err, sub)
				}
			}
		})
	}
}

// TestReaderNonFinite puts a NaN or an infinity into float data and checks
// that the Reader stops with an error naming the absolute sample index.
func TestReaderNonFinite(t *testing.T) {
	cases := []struct {
		f     Format
		index int
		value complex64
	}{
		{CF32LE, 150, complex(float32(math.NaN()), 0)}, // third block of 64
		{CF32BE, 5, complex(0, float32(math.Inf(-1)))},
		{CF64LE, 299, complex(float32(math.Inf(1)), 0)}, // last sample
		{CF64BE, 64, complex(float32(math.NaN()), float32(math.NaN()))},
	}
	for _, tc := range cases {
		samples := randSamples(rand.New(rand.NewPCG(11, 12)), 300, 0.5)
		samples[tc.index] = tc.value
		base := filepath.Join(t.TempDir(), "nan")
		data := writeSigMF(t, base, SigMFHeader{Format: tc.f, SampleRate: 1e6}, samples)
		c, err := Open(base+MetaExt, RawSettings{})
		if err != nil {
			t.Fatalf("%s: Open: %v", tc.f, err)
		}
		r, _ := c.NewReader(64)
		got, _, _, err := readBlocks(r)
		r.Close()
		var ce *CaptureError
		if !errors.As(err, &ce) || ce.File != data || !strings.Contains(err.Error(), fmt.Sprintf("sample %d is NaN or infinite", tc.index)) {
			t.Errorf("%s: error %v, want a *CaptureError for %s naming sample %d", tc.f, err, data, tc.index)
		}
		if want := tc.index / 64 * 64; len(got) != want {
			t.Errorf("%s: %d samples delivered before the error, want %d", tc.f, len(got), want)
		}
	}
}

// TestReaderFileChanged changes the data file between Open and reading:
// the Reader must notice that it shrank (mid-block or on a block boundary)
// or grew, and say at which byte.
func TestReaderFileChanged(t *testing.T) {
	const n, block, sb = 1000, 100, 4 // ci16_le
	cases := []struct {
		name   string
		size   int64 // new size in bytes
		want   []string
		blocks int // full blocks delivered before the error
	}{
		{"shrunk mid-block", 450*sb + 1, []string{"ends at byte offset 1801", "1000 samples", "shrank"}, 4},
		{"shrunk on a block boundary", 500 * sb, []string{"ends at byte offset 2000", "shrank"}, 5},
		{"shrunk to nothing", 0, []string{"ends at byte offset 0", "shrank"}, 0},
		{"grown by a sample", (n + 1) * sb, []string{"continues past the 1000 samples"}, 10},
		{"grown by a byte", n*sb + 1, []string{"continues past"}, 10},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "live.ci16")
			if err := os.WriteFile(path, make([]byte, n*sb), 0o644); err != nil {
				t.Fatal(err)
			}
			c, err := Open(path, RawSettings{SampleRate: 1e6})
			if err != nil {
				t.Fatal(err)
			}
			r, err := c.NewReader(block)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			if err := os.Truncate(path, tc.size); err != nil {
				t.Fatal(err)
			}
			got, _, _, err := readBlocks(r)
			var ce *CaptureError
			if !errors.As(err, &ce) || ce.File != path {
				t.Fatalf("error %v, want a *CaptureError for %s", err, path)
			}
			for _, sub := range tc.want {
				if !strings.Contains(err.Error(), sub) {
					t.Errorf("error %q does not mention %q", err, sub)
				}
			}
			if len(got) != tc.blocks*block {
				t.Errorf("%d samples before the error, want %d", len(got), tc.blocks*block)
			}
		})
	}
}

// TestReaderUnknownTotal streams from a plain io.Reader of unknown length:
// whole samples are all delivered, a trailing partial sample is an error
// at its byte offset.
func TestReaderUnknownTotal(t *testing.T) {
	cases := []struct {
		f      Format
		bytes  int
		block  int
		errSub string
	}{
		{CI16LE, 4 * 250, 100, ""},
		{CI16LE, 4 * 300, 100, ""}, // ends on a block boundary
		{CU8, 2 * 7, 100, ""},
		{CI16LE, 4*250 + 2, 100, "mid-sample at byte offset 1002"},
		{CF64BE, 16*3 + 15, 2, "mid-sample at byte offset 63"},
		{CI8, 0, 10, ""},
	}
	for _, tc := range cases {
		data := make([]byte, tc.bytes)
		for i := range data {
			data[i] = byte(i * 7)
		}
		if isFloat(tc.f) {
			clear(data) // keep floats finite
		}
		r := NewReader(bytes.NewReader(data), "stdin", tc.f, tc.block, -1)
		got, starts, _, err := readBlocks(r)
		if tc.errSub != "" {
			var ce *CaptureError
			if !errors.As(err, &ce) || ce.File != "stdin" || !strings.Contains(err.Error(), tc.errSub) {
				t.Errorf("%s %d bytes: %v, want a *CaptureError mentioning %q", tc.f, tc.bytes, err, tc.errSub)
			}
			continue
		}
		if err != nil || len(got) != tc.bytes/tc.f.SampleBytes() {
			t.Errorf("%s %d bytes: %d samples, %v", tc.f, tc.bytes, len(got), err)
			continue
		}
		for i, s := range starts {
			if s != int64(i*tc.block) {
				t.Errorf("%s: block %d starts at %d", tc.f, i, s)
			}
		}
		if sum := sha256.Sum256(data); r.SHA256() != hex.EncodeToString(sum[:]) {
			t.Errorf("%s: SHA256 %s, want %x", tc.f, r.SHA256(), sum)
		}
		if r.Close() != nil {
			t.Error("Close of a Reader that opened nothing")
		}
	}
}

// errReader fails after some bytes, like a disk read error.
type errReader struct {
	data []byte
	err  error
}

func (e *errReader) Read(p []byte) (int, error) {
	if len(e.data) == 0 {
		return 0, e.err
	}
	n := copy(p, e.data)
	e.data = e.data[n:]
	return n, nil
}

func TestReaderReadError(t *testing.T) {
	ioErr := errors.New("input/output error")
	r := NewReader(&errReader{data: make([]byte, 40), err: ioErr}, "disk.ci16", CI16LE, 10, 20)
	_, _, _, err := readBlocks(r)
	var ce *CaptureError
	if !errors.As(err, &ce) || !errors.Is(err, ioErr) || !strings.Contains(err.Error(), "byte offset 40") {
		t.Errorf("error %v, want a *CaptureError wrapping the read error at byte offset 40", err)
	}
}
