package ingest

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"
)

const benchSamples = 64 << 10 // 64 Ki samples per operation or block

// benchRaw returns benchSamples samples of f as bytes: random codes for
// integer formats, random finite values within full scale for floats.
func benchRaw(f Format) []byte {
	raw := make([]byte, benchSamples*f.SampleBytes())
	if isFloat(f) {
		f.Encode(raw, randSamples(rand.New(rand.NewPCG(1, 1)), benchSamples, 0.9))
	} else {
		rand.NewChaCha8([32]byte{1}).Read(raw)
	}
	return raw
}

// BenchmarkDecode decodes 64 Ki samples per operation in every format;
// MB/s counts input bytes.
func BenchmarkDecode(b *testing.B) {
	for _, f := range Formats() {
		b.Run(f.String(), func(b *testing.B) {
			raw := benchRaw(f)
			dst := make([]complex64, benchSamples)
			b.SetBytes(int64(len(raw)))
			b.ReportAllocs()
			for b.Loop() {
				f.Decode(dst, raw)
			}
		})
	}
}

// BenchmarkReader streams a 64 MiB ci16_le file from the page cache in
// blocks of 64 Ki samples: read, SHA-256 and decode.
func BenchmarkReader(b *testing.B) {
	const size = 64 << 20
	path := filepath.Join(b.TempDir(), "bench.ci16")
	data := make([]byte, size)
	rand.NewChaCha8([32]byte{2}).Read(data)
	if err := os.WriteFile(path, data, 0o644); err != nil {
		b.Fatal(err)
	}
	c, err := Open(path, RawSettings{SampleRate: 10e6})
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(size)
	b.ReportAllocs()
	for b.Loop() {
		r, err := c.NewReader(benchSamples)
		if err != nil {
			b.Fatal(err)
		}
		var n int
		for {
			blk, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				b.Fatal(err)
			}
			n += len(blk.Samples)
		}
		r.Close()
		if n != size/4 {
			b.Fatalf("read %d samples, want %d", n, size/4)
		}
	}
}

// sparseCapture makes a ci16_le raw file of size bytes that uses no disk
// (a hole: reads give zeros).
func sparseCapture(t testing.TB, size int64) string {
	path := filepath.Join(t.TempDir(), "sparse.ci16")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	f.Close()
	if err := os.Truncate(path, size); err != nil {
		t.Fatal(err)
	}
	return path
}

// streamZeros reads a sparse capture in 64 Ki-sample blocks and checks
// that every sample was delivered, all zero, and that the SHA-256 matches
// one computed with crypto/sha256 over the same count of zero bytes
// (FIPS 180-4). It returns the TotalAlloc and HeapInuse growth.
func streamZeros(t *testing.T, path string, size int64) (totalAlloc, heapInuse int64) {
	t.Helper()
	c, err := Open(path, RawSettings{SampleRate: 10e6})
	if err != nil {
		t.Fatal(err)
	}
	if c.Samples != size/4 {
		t.Fatalf("Open: %d samples, want %d", c.Samples, size/4)
	}
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	r, err := c.NewReader(benchSamples)
	if err != nil {
		t.Fatal(err)
	}
	var n int64
	var nonzero int
	for {
		b, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if b.Start != n {
			t.Fatalf("block at %d, want %d", b.Start, n)
		}
		for _, v := range b.Samples {
			if v != 0 {
				nonzero++
			}
		}
		n += int64(len(b.Samples))
	}
	r.Close()
	runtime.ReadMemStats(&after)
	if n != c.Samples || nonzero != 0 {
		t.Errorf("streamed %d samples (%d non-zero), want %d zeros", n, nonzero, c.Samples)
	}
	h := sha256.New()
	zeros := make([]byte, 1<<20)
	for left := size; left > 0; left -= int64(len(zeros)) {
		h.Write(zeros[:min(left, int64(len(zeros)))])
	}
	if want := hex.EncodeToString(h.Sum(nil)); r.SHA256() != want {
		t.Errorf("SHA256 %s, want %s", r.SHA256(), want)
	}
	return int64(after.TotalAlloc - before.TotalAlloc), int64(after.HeapInuse) - int64(before.HeapInuse)
}

// TestReaderMemoryBounded streams a 256 MiB sparse capture (64 MiB with
// -short) in 64 Ki-sample blocks and checks that the heap allocated while
// doing so stays under 4 MiB: memory is bounded by the block size (a
// sample buffer of 512 KiB and up to hashDepth+1 raw ones of 256 KiB
// here), not by the capture size.
func TestReaderMemoryBounded(t *testing.T) {
	size := int64(256 << 20)
	if testing.Short() {
		size = 64 << 20
	}
	total, inuse := streamZeros(t, sparseCapture(t, size), size)
	t.Logf("streamed %d MiB: TotalAlloc +%d KiB, HeapInuse %+d KiB", size>>20, total>>10, inuse>>10)
	if total > 4<<20 || inuse > 4<<20 {
		t.Errorf("streaming %d MiB allocated %d KiB (heap in use %+d KiB), want < 4 MiB", size>>20, total>>10, inuse>>10)
	}
}

// TestReaderBigCapture streams a sparse capture of more than 2 GiB
// (QUIETBAND_BIG_BYTES, default 2.25 GiB) and checks allocation and the
// peak resident set (VmHWM in /proc/self/status, Linux) stay small.
// Opt-in, as it reads 2 GiB: run it alone to measure the process peak,
//
//	go test -c -o /tmp/ingest.test ./ingest
//	QUIETBAND_BIG=1 /usr/bin/time -v /tmp/ingest.test -test.run TestReaderBigCapture -test.v
func TestReaderBigCapture(t *testing.T) {
	if os.Getenv("QUIETBAND_BIG") != "1" {
		t.Skip("set QUIETBAND_BIG=1 to stream a 2.25 GiB sparse capture")
	}
	size := int64(9 << 28) // 2.25 GiB
	if s := os.Getenv("QUIETBAND_BIG_BYTES"); s != "" {
		v, err := strconv.ParseInt(s, 10, 64)
		if err != nil || v <= 0 || v%4 != 0 {
			t.Fatalf("QUIETBAND_BIG_BYTES=%q: want a positive multiple of 4", s)
		}
		size = v
	}
	total, inuse := streamZeros(t, sparseCapture(t, size), size)
	hwm, ok := peakRSS()
	t.Logf("streamed %d MiB: TotalAlloc +%d KiB, HeapInuse %+d KiB, VmHWM %d KiB", size>>20, total>>10, inuse>>10, hwm>>10)
	if total > 4<<20 || inuse > 4<<20 {
		t.Errorf("streaming %d MiB allocated %d KiB (heap in use %+d KiB), want < 4 MiB", size>>20, total>>10, inuse>>10)
	}
	if ok && hwm > 128<<20 {
		t.Errorf("peak RSS %d MiB while streaming %d MiB, want < 128 MiB", hwm>>20, size>>20)
	}
}

// peakRSS reads VmHWM (peak resident set) from /proc/self/status.
func peakRSS() (int64, bool) {
	b, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0, false
	}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for sc.Scan() {
		if rest, ok := strings.CutPrefix(sc.Text(), "VmHWM:"); ok {
			kb, err := strconv.ParseInt(strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(rest), "kB")), 10, 64)
			return kb << 10, err == nil
		}
	}
	return 0, false
}
