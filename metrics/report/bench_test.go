package report

import (
	"io"
	"math/rand/v2"
	"testing"

	"quietband/detect"
	"quietband/ingest"
)

// benchBlock is one analysed block of complex Gaussian noise at 4 MS/s
// (N = 1024, M = 64), as the pipeline hands it to its observer.
func benchBlock(b *testing.B) (*ingest.Capture, *detect.BlockInput) {
	const n, m, fs = 1024, 64, 4e6
	r := rand.New(rand.NewPCG(1, 2))
	x := make([]complex64, n*m)
	for i := range x {
		x[i] = complex(float32(r.NormFloat64()*0.03), float32(r.NormFloat64()*0.03))
	}
	f := detect.NewSpectrum(n, m, fs).Analyze(0, x, 0)
	in := &detect.BlockInput{F: f, Samples: x, Floor: make([]float64, n), Rise: 1, Excluded: make([]bool, n),
		SK: make([]float64, n), SKThreshold: [2]float64{0.48, 2.2}}
	for k := range in.Floor {
		in.Floor[k], in.SK[k] = 0.0018/n, 1
	}
	c := &ingest.Capture{SampleRate: fs, Samples: 1 << 30, Segments: []ingest.Segment{{CenterHz: 1575.42e6, HasCenter: true}}}
	return c, in
}

// BenchmarkObserverBlock is the observer's cost per block of 65536
// samples (grid, PSD, SK and envelope accumulation).
func BenchmarkObserverBlock(b *testing.B) {
	c, in := benchBlock(b)
	o := NewObserver()
	o.Begin(c, len(in.Samples), in.F.N)
	b.SetBytes(int64(len(in.Samples)) * 8)
	b.ReportAllocs()
	for b.Loop() {
		o.Block(in, nil)
	}
}

// BenchmarkWriteSpectrogram draws and encodes a full 400 × 512
// spectrogram.
func BenchmarkWriteSpectrogram(b *testing.B) {
	c, in := benchBlock(b)
	c.Samples = 400 * int64(in.F.N) // 400 frames: one per row
	o := NewObserver()
	o.Begin(c, len(in.Samples), in.F.N)
	for i := int64(0); i < 7; i++ {
		in.F.Start = i * int64(len(in.Samples))
		o.Block(in, nil)
	}
	s := o.Summary()
	if s.Rows != MaxRows || s.Cols != MaxCols {
		b.Fatalf("grid %d × %d", s.Rows, s.Cols)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := WriteSpectrogram(io.Discard, s, nil, "bench"); err != nil {
			b.Fatal(err)
		}
	}
}
