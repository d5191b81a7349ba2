package ingest

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// realTone is n real samples of a tone at f Hz (file rate fs) of
// amplitude amp with Gaussian noise of RMS sigma (invented test data).
func realTone(rng *rand.Rand, n int, f, fs, amp, sigma float64) []float32 {
	out := make([]float32, n)
	for i := range out {
		out[i] = float32(amp*math.Cos(2*math.Pi*f*float64(i)/fs) + sigma*rng.NormFloat64())
	}
	return out
}

// TestOpenRealSigMF writes a real-valued SigMF recording (ri16_le at
// 12 MS/s, IF 3 MHz low side) and checks what Open and the Reader make of
// it: the file's rate and samples beside the analysed ones (half the rate,
// half the samples), the centre, the quietband extension declared in
// core:extensions (SigMF 1.2.6: {name, version, optional}), a segment
// start in file samples halved, core:sha512 verified over every byte, and
// the tone at +500 kHz.
func TestOpenRealSigMF(t *testing.T) {
	dir := t.TempDir()
	base := filepath.Join(dir, "if")
	const n, fs = 24000, 12e6
	start := time.Date(2021, 11, 25, 0, 40, 0, 0, time.UTC)
	w, err := CreateSigMF(base, SigMFHeader{Format: RI16LE, SampleRate: fs, CenterHz: 1575.42e6, HasCenter: true,
		Start: start, IF: IFConversion{3e6, LowSide}})
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(61, 62))
	if err := w.WriteReal(realTone(rng, n, 3.5e6, fs, 0.3, 0.01)); err != nil {
		t.Fatal(err)
	}
	if err := w.Write(make([]complex64, 1)); err == nil || !strings.Contains(err.Error(), "WriteReal") {
		t.Errorf("Write of complex samples to a real file: %v", err)
	}
	if w.Samples() != n {
		t.Errorf("Writer.Samples %d, want %d", w.Samples(), n)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	meta, _ := os.ReadFile(base + MetaExt)
	for _, want := range []string{`"quietband:if_hz": 3000000`, `"quietband:lo_side": "low"`, `"name": "quietband"`, `"optional": true`, `"version": "1.0.0"`} {
		if !bytes.Contains(meta, []byte(want)) {
			t.Errorf("metadata lacks %s:\n%s", want, meta)
		}
	}
	c, err := Open(base+MetaExt, RawSettings{})
	if err != nil {
		t.Fatal(err)
	}
	hz, ok := c.CenterHz()
	if c.Format != RI16LE || c.FileSampleRate != fs || c.SampleRate != fs/2 || c.Decimation != 2 || c.FileSamples != n ||
		c.Samples != n/2 || c.IF != (IFConversion{3e6, LowSide}) || !ok || hz != 1575.42e6 || !c.Start().Equal(start) ||
		c.FileSample(100) != 200 || c.Duration() != 2*time.Millisecond {
		t.Errorf("capture %+v", c)
	}
	r, err := c.NewReader(1000)
	if err != nil {
		t.Fatal(err)
	}
	var z []complex64
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err) // a core:sha512 mismatch would show here
		}
		z = append(z, b.Samples...)
	}
	data, _ := os.ReadFile(base + DataExt)
	sum := sha256.Sum256(data)
	if r.SHA256() != hex.EncodeToString(sum[:]) || len(z) != n/2 {
		t.Errorf("SHA-256 %s over %d samples, want %x over %d", r.SHA256(), len(z), sum, n/2)
	}
	r.Close()
	// The tone at IF + 500 kHz is at +500 kHz of the 6 MS/s stream.
	var at complex128
	for m := 100; m < 6100; m++ {
		at += complex128(z[m]) * complex(math.Cos(2*math.Pi*500e3*float64(m)/6e6), -math.Sin(2*math.Pi*500e3*float64(m)/6e6))
	}
	if a := math.Hypot(real(at), imag(at)) / 6000; math.Abs(a-0.3) > 0.003 {
		t.Errorf("tone amplitude %.4f at +500 kHz, want 0.3", a)
	}

	// Segments count file samples in the metadata and complex ones in
	// the Capture.
	seg := metaDoc(`"core:datatype": "ri8", "core:version": "1.2.6", "core:sample_rate": 4e6, "quietband:if_hz": 1e6, "quietband:lo_side": "high"`,
		`{"core:sample_start": 0, "core:frequency": 1.57542e9}, {"core:sample_start": 1000, "core:frequency": 1.57542e9}`,
		`{"core:sample_start": 1990, "core:sample_count": 10}`)
	p := writePair(t, filepath.Join(dir, "seg"), seg, 2000)
	c, err = Open(p, RawSettings{IFHz: 1e6, LOSide: HighSide})
	if err != nil {
		t.Fatal(err)
	}
	if len(c.Segments) != 2 || c.Segments[1].SampleStart != 500 || c.Samples != 1000 || c.IF.Side != HighSide {
		t.Errorf("segments %+v, samples %d", c.Segments, c.Samples)
	}
}

// TestOpenRealRaw reads raw real files: the settings give the IF and LO
// side; an odd number of file samples gives (n−1)/2 complex ones with
// every byte hashed; a file that grows while read is refused as a complex
// one is.
func TestOpenRealRaw(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "odd.ri8")
	rng := rand.New(rand.NewPCG(63, 64))
	data := make([]byte, 1001)
	for i := range data {
		data[i] = byte(int8(rng.IntN(7) - 3))
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	raw := RawSettings{SampleRate: 12e6, IFHz: 3e6, LOSide: LowSide, CenterHz: 1575.42e6, HasCenter: true}
	c, err := Open(path, raw)
	if err != nil {
		t.Fatal(err)
	}
	if c.Samples != 500 || c.FileSamples != 1001 || c.SampleRate != 6e6 {
		t.Fatalf("capture %+v", c)
	}
	for _, bs := range []int{1, 13, 500, 4096} {
		r, err := c.NewReader(bs)
		if err != nil {
			t.Fatal(err)
		}
		got, _, _, err := readBlocks(r)
		sum := sha256.Sum256(data)
		if err != nil || len(got) != 500 || r.SHA256() != hex.EncodeToString(sum[:]) {
			t.Errorf("block %d: %d samples, %v, SHA-256 %s", bs, len(got), err, r.SHA256())
		}
		r.Close()
	}
	// Grows after Open.
	r, _ := c.NewReader(64)
	f, _ := os.OpenFile(path, os.O_APPEND|os.O_WRONLY, 0)
	f.Write([]byte{1, 2})
	f.Close()
	_, _, _, err = readBlocks(r)
	r.Close()
	if err == nil || !strings.Contains(err.Error(), "continues past the 1001 samples") {
		t.Errorf("grown file: %v", err)
	}
}

// TestIFReaderStream covers NewIFReader with an unknown length, Block
// bookkeeping (Clipped per complex sample whose pair has a saturated code,
// as Decode counts complex samples with a saturated I or Q) and a NaN
// named by its file sample.
func TestIFReaderStream(t *testing.T) {
	data := make([]byte, 2*1000)
	vals := make([]float32, 1000)
	for i := range vals {
		vals[i] = float32(0.1 * math.Sin(float64(i)))
	}
	vals[10], vals[11] = 1.5, -1.5 // one pair, both saturated: 1 clipped
	vals[701] = 2                  // 1 clipped
	RI16LE.EncodeReal(data, vals)
	r, err := NewIFReader(bytes.NewReader(data), "stream", RI16LE, 100, -1, 4e6, IFConversion{1e6, LowSide})
	if err != nil {
		t.Fatal(err)
	}
	var blocks []Block
	clipped := 0
	for {
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		blocks = append(blocks, b)
		clipped += b.Clipped
		if b.Start == 0 && b.Clipped != 1 || b.Start == 300 && b.Clipped != 1 {
			t.Errorf("block at %d: %d clipped", b.Start, b.Clipped)
		}
	}
	r.Close()
	if len(blocks) != 5 || clipped != 2 {
		t.Errorf("%d blocks, %d clipped; want 5, 2", len(blocks), clipped)
	}
	if _, err := NewIFReader(bytes.NewReader(data), "stream", RI16LE, 100, -1, 4e6, IFConversion{}); err == nil || !strings.Contains(err.Error(), "--if") {
		t.Errorf("no IF: %v", err)
	}
	if _, err := NewIFReader(bytes.NewReader(data), "stream", CI16LE, 100, -1, 4e6, IFConversion{1e6, LowSide}); err == nil {
		t.Error("NewIFReader accepted a complex format")
	}
	// NaN at file sample 777.
	fv := make([]float32, 1000)
	fv[777] = float32(math.NaN())
	fdata := make([]byte, 4000)
	RF32LE.EncodeReal(fdata, fv)
	r, _ = NewIFReader(bytes.NewReader(fdata), "nan", RF32LE, 128, 1000, 4e6, IFConversion{1e6, LowSide})
	_, _, _, err = readBlocks(r)
	r.Close()
	if err == nil || !strings.Contains(err.Error(), "nan: sample 777 is NaN or infinite") {
		t.Errorf("NaN: %v", err)
	}
	// CreateSigMF refuses a real format without its IF.
	if _, err := CreateSigMF(filepath.Join(t.TempDir(), "x"), SigMFHeader{Format: RI8, SampleRate: 4e6}); err == nil || !strings.Contains(err.Error(), "IF is not known") {
		t.Errorf("CreateSigMF without IF: %v", err)
	}
}
