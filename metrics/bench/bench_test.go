package bench

import (
	"context"
	"fmt"
	"path/filepath"
	"runtime"
	"testing"

	"quietband/metrics/replay"
)

// BenchmarkReplay is the whole pipeline as `quietband bench` runs it: four
// 1 s captures at 10 MS/s ci16_le with eight satellites and a core:sha512
// to check, replayed with one worker per CPU given by -cpu. rt is the
// real-time factor (capture seconds per wall-clock second).
func BenchmarkReplay(b *testing.B) {
	dir := b.TempDir()
	if _, err := Captures(filepath.Join(dir, "clean"), 10e6, "ci16_le", 1, 4, false, true); err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	var audio float64
	for b.Loop() {
		sum, err := replay.Run(ctx, replay.Options{Paths: []string{filepath.Join(dir, "clean")}, Workers: max(1, runtime.GOMAXPROCS(0))})
		if err != nil {
			b.Fatal(err)
		}
		audio += sum.Signal.Seconds()
	}
	b.ReportMetric(audio/b.Elapsed().Seconds(), "rt")
}

// BenchmarkReplayModes replays BenchmarkReplay's captures, with and
// without a core:sha512 to check, in the two placements of the satellite
// meter, whatever -cpu says: inside the spectral pass (--workers 1,
// detect.SatellitesInPass) and on a read of its own beside it (2,
// detect.SatellitesOwnRead). It is the measurement behind
// replay.Placement. rt as for BenchmarkReplay.
func BenchmarkReplayModes(b *testing.B) {
	dir := b.TempDir()
	for _, sha512 := range []bool{false, true} {
		if _, err := Captures(filepath.Join(dir, fmt.Sprintf("sha512=%v", sha512)), 10e6, "ci16_le", 1, 4, false, sha512); err != nil {
			b.Fatal(err)
		}
	}
	ctx := context.Background()
	for _, sha512 := range []bool{false, true} {
		for _, m := range []struct {
			name    string
			workers int
		}{{"in-pass", 1}, {"own-read", 2}} {
			set := fmt.Sprintf("sha512=%v", sha512)
			b.Run(set+"/"+m.name, func(b *testing.B) {
				var audio float64
				for b.Loop() {
					sum, err := replay.Run(ctx, replay.Options{Paths: []string{filepath.Join(dir, set)}, Workers: m.workers})
					if err != nil {
						b.Fatal(err)
					}
					audio += sum.Signal.Seconds()
				}
				b.ReportMetric(audio/b.Elapsed().Seconds(), "rt")
			})
		}
	}
}

// TestRun: a small measurement gives every stage, in order, over the
// capture's samples (rate × length: computed), and the whole pipeline on
// one core and on all for both sets of captures, each a positive
// real-time factor.
func TestRun(t *testing.T) {
	res, err := Run(context.Background(), Options{Dir: t.TempDir(), Rate: 4e6, Format: "ci8", Seconds: 0.05, Captures: 1, Repeat: 1})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"read: decode + SHA-256", "read with a core:sha512 to check", "read + spectral bank, clean",
		"read + spectral bank, chirp jammer", "GPS acquisition (32 PRNs, 10 ms snapshot)", "GPS C/N0 tracking"}
	if len(res.Stages) != len(want) {
		t.Fatalf("%d stages, want %d", len(res.Stages), len(want))
	}
	for i, st := range res.Stages {
		if st.Name != want[i] || st.Took <= 0 || st.PerCapture != (i == 4) || !st.PerCapture && st.Samples != 4e6*0.05 {
			t.Errorf("stage %d: %+v, want %s over 200000 samples", i, st, want[i])
		}
	}
	if len(res.Pipelines) != 4 {
		t.Fatalf("%d pipeline rows, want 4", len(res.Pipelines))
	}
	for i, p := range res.Pipelines {
		if p.Captures != 1 || !(p.RealTime > 0) || p.Cores != map[bool]int{true: 1, false: runtime.NumCPU()}[i%2 == 0] {
			t.Errorf("pipeline row %d: %+v", i, p)
		}
	}
	if _, err := Run(context.Background(), Options{Dir: t.TempDir(), Rate: 4e6, Format: "ci12", Seconds: 1, Captures: 1, Repeat: 1}); err == nil {
		t.Error("an unknown format is measured")
	}
}
