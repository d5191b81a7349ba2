package detect

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"sync"
	"testing"
	"time"

	"quietband/ingest"
	"quietband/ingest/synth"
)

// goroutineID is the id of the calling goroutine, from the first line of
// its stack ("goroutine N [running]:").
func goroutineID() uint64 {
	var buf [64]byte
	b := buf[:runtime.Stack(buf[:], false)]
	b = bytes.TrimPrefix(b, []byte("goroutine "))
	id, _ := strconv.ParseUint(string(b[:bytes.IndexByte(b, ' ')]), 10, 64)
	return id
}

// spyMeter is a GNSSMeter that records on which goroutines Start and Block
// run, and counts the blocks it is given. The pipeline calls Start on the
// spectral pass's goroutine.
type spyMeter struct {
	GNSSMeter
	mu      sync.Mutex
	startG  uint64
	blockGs map[uint64]bool
	blocks  int
}

func (m *spyMeter) Start(site string, fs, center float64, has bool) string {
	m.mu.Lock()
	m.startG, m.blockGs = goroutineID(), map[uint64]bool{}
	m.mu.Unlock()
	return m.GNSSMeter.Start(site, fs, center, has)
}

func (m *spyMeter) Block(start int64, x []complex64) {
	m.mu.Lock()
	m.blockGs[goroutineID()] = true
	m.blocks++
	m.mu.Unlock()
	m.GNSSMeter.Block(start, x)
}

// onItsOwn reports whether every Block ran on one goroutine other than
// Start's.
func (m *spyMeter) onItsOwn() bool {
	m.mu.Lock()
	defer m.mu.Unlock()
	return len(m.blockGs) == 1 && !m.blockGs[m.startG]
}

// openAll writes the scenario and opens its captures in order.
func openAll(t *testing.T, s synth.Scenario, raw ingest.RawSettings) []*ingest.Capture {
	t.Helper()
	dir := t.TempDir()
	truths, err := synth.Write(&s, dir)
	if err != nil {
		t.Fatal(err)
	}
	var caps []*ingest.Capture
	for _, tr := range truths {
		c, err := ingest.Open(filepath.Join(dir, tr.Capture), raw)
		if err != nil {
			t.Fatal(err)
		}
		caps = append(caps, c)
	}
	return caps
}

// withProcs runs f with GOMAXPROCS set to n.
func withProcs(n int, f func()) {
	prev := runtime.GOMAXPROCS(n)
	defer runtime.GOMAXPROCS(prev)
	f()
}

// TestConcurrentMeterMatchesInline processes the same captures (with
// satellites, clean and with a CW, a chirp jammer and wideband noise; and
// raw captures without a centre frequency, whose satellites are skipped)
// in every placement of the meter: SatellitesAuto on one CPU (in the
// pass) and on two (its own read), SatellitesInPass on two,
// SatellitesOwnRead on one. Events, capture records (satellites included)
// and block counts must be identical, and the meter must have run where
// intended. The satellites found in clean captures must be the
// synthesizer's (the truth: PRNs 4, 9, 17, 28), and each jammed capture
// must raise an event of its emitter's class.
func TestConcurrentMeterMatchesInline(t *testing.T) {
	const fs, dur = 4e6, 0.25
	caps := func(em ...[]synth.Emitter) []synth.Capture {
		var out []synth.Capture
		for i, e := range em {
			out = append(out, synth.Capture{Name: fmt.Sprintf("c%d", i), DurationS: dur, Satellites: sky(), OffsetS: float64(i) * 60, Emitters: e})
		}
		return out
	}
	cw := []synth.Emitter{{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: 600e3, JNDB: 0}}}}
	chirp := []synth.Emitter{{Kind: synth.KindSwept, JNDB: 10, LowHz: -0.3 * fs, HighHz: 0.3 * fs, PeriodS: 12e-6}}
	wide := []synth.Emitter{{Kind: synth.KindWidebandNoise, FloorRiseDB: 6}}
	cases := []struct {
		name    string
		format  string
		caps    []synth.Capture
		raw     bool
		skipped bool
	}{
		// Clean captures teach the baselines (spectral and C/N0) between
		// the jammed ones; two sample formats (the own read decodes the
		// file itself: the vector decoder for ci16_le).
		{"jammers", "ci16_le", caps(nil, nil, cw, nil, chirp, wide), false, false},
		{"jammers cf32", "cf32_le", caps(nil, cw, chirp), false, false},
		{"raw, no centre", "ci16_le", caps(nil, nil), true, true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			s := baseScenario(fs, tc.format, dur)
			s.Seed, s.Captures, s.Raw = 31, tc.caps, tc.raw
			captures := openAll(t, s, ingest.RawSettings{SampleRate: fs})
			type way struct {
				name  string
				procs int
				where SatellitePlacement
				own   bool // the meter runs on its own goroutine
			}
			ways := []way{{"auto, one CPU", 1, SatellitesAuto, false}, {"auto, two CPUs", 2, SatellitesAuto, true},
				{"in pass, two CPUs", 2, SatellitesInPass, false}, {"own read, one CPU", 1, SatellitesOwnRead, true}}
			var results [][]*Result
			for _, w := range ways {
				m := &spyMeter{}
				p := NewPipeline(Config{}, nil)
				p.GNSS, p.SatellitePlacement = m, w.where
				var rs []*Result
				withProcs(w.procs, func() {
					for i, c := range captures {
						r, err := p.Process(context.Background(), c, fmt.Sprintf("c%d", i))
						if err != nil {
							t.Fatal(err)
						}
						rs = append(rs, r)
						if tc.skipped {
							if m.blocks != 0 {
								t.Errorf("%s: skipped meter given %d blocks", w.name, m.blocks)
							}
						} else if m.onItsOwn() != w.own {
							t.Errorf("%s: meter on a goroutine of its own = %v, want %v", w.name, m.onItsOwn(), w.own)
						}
					}
				})
				results = append(results, rs)
			}
			for i := range captures {
				want := results[0][i]
				for k, w := range ways[1:] {
					got := results[k+1][i]
					if !reflect.DeepEqual(got.Events, want.Events) || !reflect.DeepEqual(got.Record, want.Record) || got.Blocks != want.Blocks {
						t.Errorf("capture %d: %s differs from one CPU:\n got  %+v\n want %+v", i, w.name, got.Record, want.Record)
					}
				}
				st := want.Record.Stats
				if tc.skipped {
					if st.GNSSSkipped == "" || len(st.Satellites) != 0 {
						t.Errorf("capture %d: gnss_skipped %q with %d satellites, want a reason and none", i, st.GNSSSkipped, len(st.Satellites))
					}
					continue
				}
				em := tc.caps[i].Emitters
				if len(em) > 0 {
					var classes []string
					for _, e := range want.Events {
						classes = append(classes, e.Class)
					}
					if !slices.Contains(classes, em[0].Kind) {
						t.Errorf("capture %d: events %v, want a %s among them", i, classes, em[0].Kind)
					}
					continue
				}
				var prns []int
				for _, sat := range st.Satellites {
					prns = append(prns, sat.PRN)
				}
				if !slices.Equal(prns, []int{4, 9, 17, 28}) {
					t.Errorf("capture %d: satellites %v, want PRNs 4 9 17 28 (the synthesized sky)", i, prns)
				}
			}
		})
	}
}

// cancelAfter is an Observer that cancels a context after n blocks.
type cancelAfter struct {
	n      int
	cancel context.CancelFunc
}

func (o *cancelAfter) Begin(*ingest.Capture, int, int) {}
func (o *cancelAfter) Block(*BlockInput, []Finding) {
	if o.n--; o.n == 0 {
		o.cancel()
	}
}

// meterGoroutines counts the goroutines startSatellites started for an
// own read (running or about to), from a dump of every goroutine's stack.
func meterGoroutines() int {
	buf := make([]byte, 1<<20)
	for {
		n := runtime.Stack(buf, true)
		if n < len(buf) {
			return bytes.Count(buf[:n], []byte("created by quietband/detect.startSatellites"))
		}
		buf = make([]byte, 2*len(buf))
	}
}

// TestConcurrentMeterStops: a cancelled context or a read error mid-way
// (the data file cut after Open) ends the pass with the error; the meter's
// own read (SatellitesAuto on two CPUs) has ended by the time the call returns (no Block call after
// it, no goroutine of the meter left) and the pipeline measures
// the next capture as if nothing had happened.
func TestConcurrentMeterStops(t *testing.T) {
	const fs, dur = 4e6, 0.25
	s := baseScenario(fs, "ci16_le", dur)
	s.Captures = []synth.Capture{{Name: "a", DurationS: dur, Satellites: sky()}, {Name: "b", DurationS: dur, Satellites: sky(), OffsetS: 60}}
	captures := openAll(t, s, ingest.RawSettings{})
	cases := []struct {
		name string
		run  func(p *Pipeline) error
		want func(error) bool
	}{
		{"cancel", func(p *Pipeline) error {
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			p.Observer = &cancelAfter{n: 5, cancel: cancel}
			defer func() { p.Observer = nil }()
			_, err := p.Process(ctx, captures[0], "a")
			return err
		}, func(err error) bool { return errors.Is(err, context.Canceled) }},
		{"read error", func(p *Pipeline) error {
			c := *captures[0]
			data, err := os.ReadFile(c.DataPath)
			if err != nil {
				t.Fatal(err)
			}
			c.DataPath = filepath.Join(t.TempDir(), "cut.sigmf-data")
			if err := os.WriteFile(c.DataPath, data[:len(data)/2], 0o644); err != nil {
				t.Fatal(err)
			}
			_, err = p.Process(context.Background(), &c, "cut")
			return err
		}, func(err error) bool {
			var ce *ingest.CaptureError
			return errors.As(err, &ce)
		}},
	}
	withProcs(2, func() {
		for _, tc := range cases {
			t.Run(tc.name, func(t *testing.T) {
				ref := NewPipeline(Config{}, nil)
				ref.GNSS, ref.SatellitePlacement = &GNSSMeter{}, SatellitesInPass
				want, err := ref.Process(context.Background(), captures[1], "b")
				if err != nil {
					t.Fatal(err)
				}

				m := &spyMeter{}
				p := NewPipeline(Config{}, nil)
				p.GNSS = m
				if n := meterGoroutines(); n != 0 {
					t.Fatalf("%d meter goroutines before the call", n)
				}
				err = tc.run(p)
				if !tc.want(err) {
					t.Fatalf("error %v", err)
				}
				m.mu.Lock()
				n := m.blocks
				m.mu.Unlock()
				// The goroutine has closed its done channel; give it a moment to
				// return.
				deadline := time.Now().Add(time.Second)
				for meterGoroutines() != 0 && time.Now().Before(deadline) {
					time.Sleep(time.Millisecond)
				}
				if g := meterGoroutines(); g != 0 {
					t.Errorf("%d meter goroutines left after the call", g)
				}
				m.mu.Lock()
				if m.blocks != n {
					t.Errorf("meter given %d blocks after the call returned", m.blocks-n)
				}
				m.mu.Unlock()

				got, err := p.Process(context.Background(), captures[1], "b")
				if err != nil {
					t.Fatal(err)
				}
				if !m.onItsOwn() || !reflect.DeepEqual(got.Record.Stats.Satellites, want.Record.Stats.Satellites) || len(got.Record.Stats.Satellites) == 0 {
					t.Errorf("next capture: satellites %+v, want %+v measured on the meter's own goroutine", got.Record.Stats.Satellites, want.Record.Stats.Satellites)
				}
			})
		}
	})
}

// BenchmarkProcessMeasured is the whole pipeline on one 1 s capture at
// 10 MS/s ci16_le with the four satellites of sky(): read, hashes,
// spectral bank and satellites (acquisition and C/N0). Run with -cpu 1,2:
// one CPU measures the satellites in the pass, more on a read of their
// own (SatellitesAuto). rt is the real-time factor (capture seconds per
// second).
func BenchmarkProcessMeasured(b *testing.B) {
	const fs = 10e6
	c := writeOne(b, baseScenario(fs, "ci16_le", 1))
	p := NewPipeline(Config{}, nil)
	p.GNSS = &GNSSMeter{}
	ctx := context.Background()
	if _, err := p.Process(ctx, c, "warm-up"); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		r, err := p.Process(ctx, c, "bench")
		if err != nil {
			b.Fatal(err)
		}
		if len(r.Record.Stats.Satellites) == 0 {
			b.Fatal("no satellites measured")
		}
	}
	b.ReportMetric(c.Duration().Seconds()*float64(b.N)/b.Elapsed().Seconds(), "rt")
}
