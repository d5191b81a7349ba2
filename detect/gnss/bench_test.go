package gnss

import (
	"fmt"
	"math/rand/v2"
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

// BenchmarkAcquire32PRN_10ms searches all 32 PRNs (21 Doppler bins,
// K = 10 blocks of 1 ms) in a 10 ms snapshot with four signals at 42 dB-Hz,
// at 4 and 10 MS/s.
func BenchmarkAcquire32PRN_10ms(b *testing.B) {
	for _, fs := range []float64{4e6, 10e6} {
		b.Run(fmt.Sprintf("%gMSps", fs/1e6), func(b *testing.B) {
			c, _ := benchSats(7, fs, gpsca.L1, int(0.01*fs), []int{2, 9, 17, 30}, 42)
			a, err := NewAcquirer(AcqConfig{}, fs, gpsca.L1)
			if err != nil {
				b.Fatal(err)
			}
			var res []Acquired
			b.ReportAllocs()
			for b.Loop() {
				res, err = a.Acquire(res, c.x)
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

// BenchmarkPipeline_1s_10MSps is the GNSS part of the capture pipeline:
// acquisition of all 32 PRNs on the first 10 ms, then tracking of the
// acquired satellites (eight at 45 dB-Hz) over the whole 1 s capture at
// 10 MS/s in 65 536-sample blocks. rt is the real-time factor (capture
// duration over processing time).
func BenchmarkPipeline_1s_10MSps(b *testing.B) {
	const fs = 10e6
	c, _ := benchSats(9, fs, gpsca.L1, int(fs), []int{1, 4, 8, 12, 19, 23, 27, 31}, 45)
	a, err := NewAcquirer(AcqConfig{}, fs, gpsca.L1)
	if err != nil {
		b.Fatal(err)
	}
	var acq []Acquired
	b.ReportAllocs()
	for b.Loop() {
		acq, err = a.Acquire(acq, c.x[:a.SnapshotLen()])
		if err != nil {
			b.Fatal(err)
		}
		t, err := NewTracker(fs, gpsca.L1, acq, 0)
		if err != nil {
			b.Fatal(err)
		}
		const blk = 65536
		for i := 0; i < len(c.x); i += blk {
			t.Process(c.x[i:min(i+blk, len(c.x))], int64(i))
		}
		if len(t.Result()) != 8 {
			b.Fatalf("acquired %d, tracked %d", len(acq), len(t.Result()))
		}
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "rt")
}
