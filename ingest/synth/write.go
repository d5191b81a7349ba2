package synth

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"time"

	"quietband/ingest"
	"quietband/ingest/gpsca"
)

// TruthExt is the extension of the truth sidecar written beside a capture.
const TruthExt = ".truth.json"

// Truth is what a synthesized capture contains, exactly.
type Truth struct {
	Scenario    string         `json:"scenario"`
	Site        string         `json:"site"`
	Capture     string         `json:"capture"` // data (raw) or metadata (SigMF) file name
	Format      string         `json:"format"`
	SampleRate  float64        `json:"sample_rate_hz"`
	CenterHz    float64        `json:"center_hz"`
	Start       time.Time      `json:"start"`
	Samples     int64          `json:"samples"`
	NoiseDBFS   float64        `json:"noise_dbfs"` // σ² in dBFS
	N0DBFSPerHz float64        `json:"n0_dbfs_hz"` // N0 = σ²/fs
	Clipped     int64          `json:"clipped"`    // samples saturated when written
	Satellites  []Satellite    `json:"satellites"` // C/N0 after attenuation
	Emitters    []TruthEmitter `json:"emitters"`
}

// TruthEmitter is an emitter with its sample span resolved.
type TruthEmitter struct {
	Emitter
	StartSample int64 `json:"start_sample"`
	EndSample   int64 `json:"end_sample"` // exclusive
}

// blockSamples is how many samples are generated and written at a time:
// memory stays at a few blocks whatever the capture length.
const blockSamples = 1 << 16

// Write synthesizes every capture of s into dir and returns their truths.
// SigMF captures are written data first and metadata last.
func Write(s *Scenario, dir string) ([]Truth, error) {
	if err := s.Normalize(); err != nil {
		return nil, err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	var out []Truth
	for i := range s.Captures {
		t, err := WriteCapture(s, i, dir)
		if err != nil {
			return out, err
		}
		out = append(out, t)
	}
	return out, nil
}

// rawExt is the file extension for raw captures of format f.
func rawExt(f ingest.Format) string {
	switch f {
	case ingest.CI16LE:
		return ".ci16"
	case ingest.CF32LE:
		return ".cf32"
	}
	return "." + f.String()
}

// WriteCapture synthesizes capture i of s (already normalized) into dir.
func WriteCapture(s *Scenario, i int, dir string) (Truth, error) {
	c := s.Captures[i]
	format, _ := ingest.ParseFormat(s.Format)
	fs := s.SampleRate
	n := int64(math.Round(c.DurationS * fs))
	start := s.Start.Add(time.Duration(c.OffsetS * float64(time.Second)))
	truth := Truth{Scenario: s.Name, Site: s.Site, Format: format.String(), SampleRate: fs,
		CenterHz: s.CenterHz, Start: start, Samples: n, NoiseDBFS: s.NoiseDBFS,
		N0DBFSPerHz: s.NoiseDBFS - 10*math.Log10(fs)}

	sources, err := buildSources(s, i, n, &truth)
	if err != nil {
		return truth, fmt.Errorf("capture %s: %w", c.Name, err)
	}

	var w *ingest.Writer
	base := filepath.Join(dir, c.Name)
	if s.Raw {
		truth.Capture = c.Name + rawExt(format)
		w, err = ingest.CreateRaw(base+rawExt(format), format)
	} else {
		truth.Capture = c.Name + ingest.MetaExt
		w, err = ingest.CreateSigMF(base, ingest.SigMFHeader{Format: format, SampleRate: fs,
			CenterHz: s.CenterHz, HasCenter: true, Start: start,
			Description: fmt.Sprintf("synthesized: scenario %s, site %s (quietband synth)", s.Name, s.Site)})
	}
	if err != nil {
		return truth, err
	}
	buf := make([]complex64, blockSamples)
	for n0 := int64(0); n0 < n; n0 += blockSamples {
		blk := buf[:min(int64(blockSamples), n-n0)]
		clear(blk)
		for _, src := range sources {
			src.add(blk, n0)
		}
		if err := w.Write(blk); err != nil {
			w.Close()
			return truth, err
		}
	}
	truth.Clipped = w.Clipped()
	// The truth goes down before the metadata that makes the capture
	// visible to a watcher.
	tb, _ := json.MarshalIndent(truth, "", "  ")
	if err := ingest.WriteFileAtomic(base+TruthExt, append(tb, '\n')); err != nil {
		w.Close()
		return truth, err
	}
	if err := w.Close(); err != nil {
		return truth, err
	}
	if s.Raw {
		// Give raw files a modification time matching their end, so that
		// the reader's default start time (mtime − duration) is the truth.
		end := start.Add(time.Duration(float64(n) / fs * float64(time.Second)))
		os.Chtimes(base+rawExt(format), end, end)
	}
	return truth, nil
}

// buildSources makes the sources of capture i, each with its own seeded
// random stream so that captures are deterministic for a seed.
func buildSources(s *Scenario, i int, n int64, truth *Truth) ([]source, error) {
	c := s.Captures[i]
	fs := s.SampleRate
	sigma2 := math.Pow(10, s.NoiseDBFS/10)
	stream := uint64(0)
	rng := func() *rand.Rand {
		stream++
		return rand.New(rand.NewPCG(s.Seed^0x9e3779b97f4a7c15, uint64(i)<<20|stream))
	}
	all := span{0, n}
	srcs := []source{newGaussian(rng(), sigma2, all)}
	for _, sat := range c.Satellites {
		code, err := gpsca.Code(sat.PRN)
		if err != nil {
			return nil, err
		}
		cn0 := sat.CN0DBHz - c.AttenuationDB
		r := rng()
		bits := make([]int8, int(c.DurationS*50)+2)
		for k := range bits {
			bits[k] = int8(1 - 2*r.IntN(2))
		}
		srcs = append(srcs, &satellite{
			amp:             math.Sqrt(math.Pow(10, cn0/10) * sigma2 / fs),
			code:            code,
			bits:            bits,
			chip0:           gpsca.WrapChips(sat.CodePhaseChips),
			chipsPerSample:  gpsca.CodeRate(sat.DopplerHz) / fs,
			cyclesPerSample: (gpsca.L1 - s.CenterHz + sat.DopplerHz) / fs,
			phase0:          2 * math.Pi * r.Float64(),
		})
		ts := sat
		ts.CN0DBHz = cn0
		truth.Satellites = append(truth.Satellites, ts)
	}
	for _, e := range c.Emitters {
		on := span{int64(math.Round(e.StartS * fs)), min(n, int64(math.Round(e.EndS*fs)))}
		truth.Emitters = append(truth.Emitters, TruthEmitter{Emitter: e, StartSample: on.lo, EndSample: on.hi})
		r := rng()
		jn := math.Pow(10, e.JNDB/10) * sigma2
		switch e.Kind {
		case KindCW:
			for _, t := range e.Tones {
				srcs = append(srcs, &tone{amp: math.Sqrt(math.Pow(10, t.JNDB/10) * sigma2),
					cyclesPerSample: t.OffsetHz / fs, phase0: 2 * math.Pi * r.Float64(), on: on})
			}
		case KindSwept:
			srcs = append(srcs, &chirp{amp: math.Sqrt(jn), low: e.LowHz, high: e.HighHz, period: e.PeriodS,
				fs: fs, shape: e.Shape, cycles: r.Float64(), on: on})
		case KindPulsed:
			srcs = append(srcs, &pulses{amp: math.Sqrt(jn), cyclesPerSample: e.OffsetHz / fs, fs: fs,
				gaussian: e.Pulse == "gaussian_pair", width: e.WidthS, pri: e.PRIS, pair: e.PairSpacingS,
				first: e.PRIS * (0.25 + 0.5*r.Float64()), on: on})
		case KindWidebandNoise:
			srcs = append(srcs, newGaussian(r, jn, on))
		case KindNarrowbandNoise:
			srcs = append(srcs, newBandNoise(r, fs, e.OffsetHz, e.BandwidthHz, jn, on))
		}
	}
	return srcs, nil
}
