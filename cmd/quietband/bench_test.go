package main

import (
	"context"
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
		sum, err := replay(ctx, replayOptions{paths: []string{filepath.Join(dir, "clean")}, workers: max(1, runtimeProcs()), out: io.Discard, errOut: io.Discard})
		if err != nil {
			b.Fatal(err)
		}
		audio += sum.audio.Seconds()
	}
	b.ReportMetric(audio/b.Elapsed().Seconds(), "rt")
}

func runtimeProcs() int { return runtime.GOMAXPROCS(0) }
