package gnss

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"testing"

	"quietband/ingest/gpsca"
)

// benchSats returns a synthetic capture of n samples at fs centred at
// center with the given PRNs at cn0 dB-Hz (random Doppler within ±5 kHz,
// code and carrier phase), and their true start values.
func benchSats(seed uint64, fs, center float64, n int, prns []int, cn0 float64) (capture, []Acquired) {
	rng := rand.New(rand.NewPCG(seed, seed))
	var sats []satSpec
	var acq []Acquired
	for _, prn := range prns {
		s := randomSat(rng, prn, cn0, 5000)
		sats = append(sats, s)
		acq = append(acq, Acquired{PRN: prn, DopplerHz: s.dopplerHz + 10, CodePhaseChips: s.codePhase + 0.05})
	}
	return synthesize(rng, fs, center, 1, n, sats), acq
}

// BenchmarkAcquire32PRN_10ms searches all 32 PRNs (K = 10 blocks of 1 ms)
// in a 10 ms snapshot with four signals at 42 dB-Hz, at 4 and 10 MS/s:
// "wide" is the default search while a site's clock offset is unknown
// (±15 kHz, 61 Doppler bins), "narrow" the search around a known offset
// (±7 kHz, 29 bins), "geometric" the former default (±5 kHz, 21 bins).
func BenchmarkAcquire32PRN_10ms(b *testing.B) {
	for _, fs := range []float64{4e6, 10e6} {
		for _, mode := range []string{"wide", "narrow", "geometric"} {
			b.Run(fmt.Sprintf("%gMSps/%s", fs/1e6, mode), func(b *testing.B) {
				c, _ := benchSats(7, fs, gpsca.L1, int(0.01*fs), []int{2, 9, 17, 30}, 42)
				cfg := AcqConfig{}
				if mode == "geometric" {
					cfg.ClockMaxHz = -1
				}
				a, err := NewAcquirer(cfg, fs, gpsca.L1)
				if err != nil {
					b.Fatal(err)
				}
				var res []Acquired
				b.ReportAllocs()
				for b.Loop() {
					if mode == "narrow" {
						res, err = a.AcquireAround(res, c.x, 0, DefaultDopplerMaxHz+2000)
					} else {
						res, err = a.Acquire(res, c.x)
					}
					if err != nil {
						b.Fatal(err)
					}
				}
				if len(res) != 4 {
					b.Fatalf("acquired %v", res)
				}
				b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/1e6, "ms/snapshot")
			})
		}
	}
}

// BenchmarkMitigate10ms is the interference mitigation of one 10 ms
// snapshot (passband estimate, two blanking passes, three excision
// stages) on noise with four satellites, at 4 and 10 MS/s.
func BenchmarkMitigate10ms(b *testing.B) {
	for _, fs := range []float64{4e6, 10e6} {
		b.Run(fmt.Sprintf("%gMSps", fs/1e6), func(b *testing.B) {
			c, _ := benchSats(7, fs, gpsca.L1, int(0.01*fs), []int{2, 9, 17, 30}, 42)
			m := NewMitigator(fs)
			y := make([]complex64, len(c.x))
			m.Mitigate(y, c.x)
			b.ReportAllocs()
			for b.Loop() {
				m.Mitigate(y, c.x)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/1e6, "ms/snapshot")
		})
	}
}

// BenchmarkTrack8Sats_1s_10MSps tracks eight satellites over 1 s at 10 MS/s,
// fed in 100 000-sample blocks, with L1 at the centre of the capture and
// 1.5 MHz off it (front-end mixing).
func BenchmarkTrack8Sats_1s_10MSps(b *testing.B) {
	const fs = 10e6
	for _, off := range []float64{0, 1.5e6} {
		b.Run(fmt.Sprintf("offset%gMHz", off/1e6), func(b *testing.B) {
			center := gpsca.L1 - off
			c, acq := benchSats(8, fs, center, int(fs), []int{1, 4, 8, 12, 19, 23, 27, 31}, 45)
			b.ReportAllocs()
			for b.Loop() {
				t, err := NewTracker(fs, center, acq, 0)
				if err != nil {
					b.Fatal(err)
				}
				const blk = 100000
				for i := 0; i < len(c.x); i += blk {
					t.Process(c.x[i:min(i+blk, len(c.x))], int64(i))
				}
				if len(t.Result()) != len(acq) {
					b.Fatal("lost satellites")
				}
			}
			b.ReportMetric(float64(len(c.x))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
		})
	}
}

// BenchmarkPipeline_1s_10MSps is the GNSS part of the capture pipeline,
// the Meter over a 1 s capture at 10 MS/s in 65 536-sample blocks with
// eight satellites at 45 dB-Hz: interference mitigation and acquisition of
// all 32 PRNs on the first 10 ms, then tracking over the whole capture
// and the orientation test. "steady" is every capture of an input after
// the first (the site's clock offset known: the narrow search), "first"
// the first capture (the wide search), "chirp" a steady capture with the
// demo's chirp (a sweep over ±1.2 MHz every 15 µs) at J/N 12 dB, which
// the Meter tracks on mitigated blocks. rt is the real-time factor
// (capture duration over processing time).
func BenchmarkPipeline_1s_10MSps(b *testing.B) {
	const fs = 10e6
	c, _ := benchSats(9, fs, gpsca.L1, int(fs), []int{1, 4, 8, 12, 19, 23, 27, 31}, 45)
	for _, mode := range []string{"steady", "first", "chirp"} {
		b.Run(mode, func(b *testing.B) {
			x := c.x
			if mode == "chirp" {
				x = slices.Clone(c.x)
				addSweep(x, fs, c.sigma2, -1.2e6, 1.2e6, 15e-6, 12)
			}
			m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: 1e-3 / 32}})
			run := func() Measurement {
				if err := m.Start(fs, gpsca.L1); err != nil {
					b.Fatal(err)
				}
				if mode == "first" {
					m.site.clockKnown = false
				}
				const blk = 65536
				for i := 0; i < len(x); i += blk {
					m.Block(int64(i), x[i:min(i+blk, len(x))])
				}
				return m.Result()
			}
			run() // learns the site
			b.ReportAllocs()
			for b.Loop() {
				r := run()
				if len(r.Satellites) != 8 || r.WideSearch != (mode == "first") || m.mitTrack != (mode == "chirp") {
					b.Fatalf("measured %d satellites, wide search %v, mitigated tracking %v", len(r.Satellites), r.WideSearch, m.mitTrack)
				}
			}
			b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "rt")
		})
	}
}
