package main

import (
	"context"
	"fmt"
	"io"
	"path/filepath"
	"runtime"
	"testing"
)

// BenchmarkReplay is the whole pipeline as `quietband bench` runs it: four
// 1 s captures at 10 MS/s ci16_le with eight satellites and a core:sha512
// to check, replayed with one worker per CPU given by -cpu. rt is the
// real-time factor (capture seconds per wall-clock second).
func BenchmarkReplay(b *testing.B) {
	dir := b.TempDir()
	if _, err := benchCaptures(filepath.Join(dir, "clean"), 10e6, "ci16_le", 1, 4, false, true); err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	var audio float64
	for b.Loop() {
		sum, err := replayCaptures(ctx, replayOptions{paths: []string{filepath.Join(dir, "clean")}, workers: max(1, runtimeProcs()), out: io.Discard, errOut: io.Discard})
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
		if _, err := benchCaptures(filepath.Join(dir, fmt.Sprintf("sha512=%v", sha512)), 10e6, "ci16_le", 1, 4, false, sha512); err != nil {
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
					sum, err := replayCaptures(ctx, replayOptions{paths: []string{filepath.Join(dir, set)}, workers: m.workers, out: io.Discard, errOut: io.Discard})
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

func runtimeProcs() int { return runtime.GOMAXPROCS(0) }
