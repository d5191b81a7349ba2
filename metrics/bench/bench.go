// Package bench measures whether a machine keeps up with a recorder, as
// `quietband bench` reports it: it synthesizes captures like a recorder's
// (GPS satellites and noise, with and without a core:sha512 in their
// metadata, and one with a chirp jammer, which wakes the costlier sweep
// analysis), then times each stage on one core (reading: decode and
// SHA-256, and the core:sha512 check; the spectral detector bank; GPS
// acquisition and C/N0 tracking) and the whole pipeline (replay.Run, the
// satellites included) on one core and on all.
//
// These are measurements of the machine they run on; the repository's
// own figures come from benchmarks (go test -bench).
package bench

import (
	"context"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"runtime"
	"slices"
	"time"

	"quietband/detect"
	"quietband/detect/gnss"
	"quietband/ingest"
	"quietband/ingest/synth"
	"quietband/metrics/replay"
)

// Options are what Run measures.
type Options struct {
	Dir      string  // folder for the synthesized captures
	Rate     float64 // sample rate, samples/s
	Format   string  // SigMF datatype
	Seconds  float64 // length of each capture
	Captures int     // captures per whole-pipeline run
	Repeat   int     // whole-pipeline runs per core count (the median is kept)
}

// Stage is one stage's time on one core: Took for Samples complex
// samples, or, PerCapture, for one capture.
type Stage struct {
	Name       string
	Samples    float64
	Took       time.Duration
	PerCapture bool
}

// Pipeline is the whole pipeline's real-time factor (capture seconds per
// wall-clock second, the median of Repeat runs) over one set of captures
// on Cores cores.
type Pipeline struct {
	Set      string
	Captures int
	Cores    int
	RealTime float64
}

// Result is what Run measured: the stages in order, and the whole
// pipeline on one core and on every core, for captures without and with
// a core:sha512 to check.
type Result struct {
	Stages    []Stage
	Pipelines []Pipeline
}

// Run synthesizes the captures into o.Dir and measures (see the package
// documentation). It sets GOMAXPROCS while it measures and restores it.
func Run(ctx context.Context, o Options) (*Result, error) {
	if _, err := ingest.ParseFormat(o.Format); err != nil {
		return nil, err
	}
	if o.Seconds <= 0 || o.Captures < 1 || o.Repeat < 1 {
		return nil, errors.New("bench: seconds must be > 0, captures and repeat ≥ 1")
	}
	// Recorders write captures with and without core:sha512 (SigMF makes
	// it optional); when it is there, its check is a cost of its own.
	clean, err := Captures(filepath.Join(o.Dir, "clean"), o.Rate, o.Format, o.Seconds, o.Captures, false, false)
	if err != nil {
		return nil, err
	}
	hashed, err := Captures(filepath.Join(o.Dir, "sha512"), o.Rate, o.Format, o.Seconds, o.Captures, false, true)
	if err != nil {
		return nil, err
	}
	jammed, err := Captures(filepath.Join(o.Dir, "chirp"), o.Rate, o.Format, o.Seconds, 1, true, false)
	if err != nil {
		return nil, err
	}
	prev := runtime.GOMAXPROCS(1)
	defer runtime.GOMAXPROCS(prev)
	var res Result
	samples := float64(clean[0].Samples)
	for _, c := range []struct {
		name string
		cap  *ingest.Capture
	}{{"read: decode + SHA-256", clean[0]}, {"read with a core:sha512 to check", hashed[0]}} {
		d, err := timeRead(c.cap)
		if err != nil {
			return nil, err
		}
		res.Stages = append(res.Stages, Stage{Name: c.name, Samples: samples, Took: d})
	}
	for _, c := range []struct {
		name string
		cap  *ingest.Capture
	}{{"read + spectral bank, clean", clean[0]}, {"read + spectral bank, chirp jammer", jammed[0]}} {
		p := detect.NewPipeline(detect.Config{}, nil)
		if _, err := p.Process(ctx, c.cap, "warm-up"); err != nil {
			return nil, err
		}
		t0 := time.Now()
		if _, err := p.Process(ctx, c.cap, "bench"); err != nil {
			return nil, err
		}
		res.Stages = append(res.Stages, Stage{Name: c.name, Samples: samples, Took: time.Since(t0)})
	}
	acq, track, err := timeGNSS(ctx, clean[0])
	if err != nil {
		return nil, err
	}
	res.Stages = append(res.Stages, Stage{Name: "GPS acquisition (32 PRNs, 10 ms snapshot)", Took: acq, PerCapture: true},
		Stage{Name: "GPS C/N0 tracking", Samples: samples, Took: track})

	for _, set := range []struct{ name, dir string }{{"captures without core:sha512", "clean"}, {"captures with core:sha512", "sha512"}} {
		cores := []int{1, runtime.NumCPU()}
		rt := make([][]float64, len(cores))
		n := 0
		// The runs alternate between the core counts, so that a slow
		// spell of a shared machine falls on both.
		for range o.Repeat {
			for i, c := range cores {
				runtime.GOMAXPROCS(c)
				t0 := time.Now()
				sum, err := replay.Run(ctx, replay.Options{Paths: []string{filepath.Join(o.Dir, set.dir)}, Workers: c})
				if err != nil {
					return nil, err
				}
				rt[i] = append(rt[i], sum.Signal.Seconds()/time.Since(t0).Seconds())
				n = sum.Captures
			}
		}
		for i, c := range cores {
			res.Pipelines = append(res.Pipelines, Pipeline{Set: set.name, Captures: n, Cores: c, RealTime: median(rt[i])})
		}
	}
	return &res, nil
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

// Captures synthesizes n captures of seconds each into dir (the demo
// sky's eight satellites and noise, and a chirp jammer when jam) and
// opens them; their metadata keeps its core:sha512 only if sha512 is set.
func Captures(dir string, fs float64, format string, seconds float64, n int, jam, sha512 bool) ([]*ingest.Capture, error) {
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
