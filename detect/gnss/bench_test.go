package gnss

import (
	"math/rand/v2"
	"testing"

	"quietband/ingest/gpsca"
)

// BenchmarkAcquire32PRN_10ms_4MSps searches all 32 PRNs (21 Doppler bins,
// K = 10 blocks of 1 ms) in a 10 ms snapshot at 4 MS/s with four signals.
func BenchmarkAcquire32PRN_10ms_4MSps(b *testing.B) {
	const fs = 4e6
	rng := rand.New(rand.NewPCG(7, 7))
	var sats []satSpec
	for _, prn := range []int{2, 9, 17, 30} {
		sats = append(sats, randomSat(rng, prn, 42, 5000))
	}
	c := synthesize(rng, fs, gpsca.L1, 1, int(0.01*fs), sats)
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
	b.ReportMetric(float64(len(c.x))*float64(b.N)/b.Elapsed().Seconds()/1e6, "MS/s")
}

// BenchmarkTrack8Sats_1s_10MSps tracks eight satellites over 1 s at 10 MS/s,
// fed in 100 000-sample blocks.
func BenchmarkTrack8Sats_1s_10MSps(b *testing.B) {
	const fs = 10e6
	rng := rand.New(rand.NewPCG(8, 8))
	var sats []satSpec
	var acq []Acquired
	for _, prn := range []int{1, 4, 8, 12, 19, 23, 27, 31} {
		s := randomSat(rng, prn, 45, 5000)
		sats = append(sats, s)
		acq = append(acq, Acquired{PRN: prn, DopplerHz: s.dopplerHz + 10, CodePhaseChips: s.codePhase + 0.05})
	}
	c := synthesize(rng, fs, gpsca.L1, 1, int(fs), sats)
	b.ReportAllocs()
	for b.Loop() {
		t, err := NewTracker(fs, gpsca.L1, acq, 0)
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
}
