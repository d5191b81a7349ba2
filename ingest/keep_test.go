package ingest

import (
	"bytes"
	"crypto/sha256"
	"crypto/sha512"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"
)

// hashers counts the hashing goroutines (those the Reader's hash method
// started, running or about to), from a dump of every goroutine's stack.
func hashers() int {
	buf := make([]byte, 1<<20)
	for {
		n := runtime.Stack(buf, true)
		if n < len(buf) {
			return bytes.Count(buf[:n], []byte("created by quietband/ingest.(*Reader).hash"))
		}
		buf = make([]byte, 2*len(buf))
	}
}

// hashersBack waits (up to a second) for the hasher count to fall back to
// n, and returns it.
func hashersBack(n int) int {
	deadline := time.Now().Add(time.Second)
	for hashers() > n && time.Now().Before(deadline) {
		time.Sleep(time.Millisecond)
	}
	return hashers()
}

// TestReaderHashGoroutines streams a SigMF recording with core:sha512 in
// uneven blocks with one to four CPUs: SHA-256 mid-way and at the end is
// that of the bytes read (FIPS 180-4, computed by crypto/sha256), the
// core:sha512 (FIPS 180-4, crypto/sha512) is checked, intact data passes
// and one flipped byte fails; hashing runs inline with one CPU, on one
// goroutine with two, on two (SHA-256 and SHA-512 apart) with more; and
// Close leaves no goroutine behind. Run with -race, this also checks that
// no raw buffer is refilled while a hasher reads it.
func TestReaderHashGoroutines(t *testing.T) {
	const n, block = 3001, 97
	base := filepath.Join(t.TempDir(), "hashed")
	data := writeSigMF(t, base, SigMFHeader{Format: CF32LE, SampleRate: 1e6}, randSamples(rand.New(rand.NewPCG(5, 6)), n, 0.5))
	orig, err := os.ReadFile(data)
	if err != nil {
		t.Fatal(err)
	}
	prev := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(prev)
	for _, tc := range []struct {
		procs, goroutines int
	}{{1, 0}, {2, 1}, {3, 2}, {4, 2}} {
		for _, tamper := range []bool{false, true} {
			t.Run(fmt.Sprintf("procs%d/tampered=%v", tc.procs, tamper), func(t *testing.T) {
				runtime.GOMAXPROCS(tc.procs)
				mod := bytes.Clone(orig)
				if tamper {
					mod[len(mod)/2] ^= 0x01 // a float32 bit flip, still finite
				}
				if err := os.WriteFile(data, mod, 0o644); err != nil {
					t.Fatal(err)
				}
				c, err := Open(base+MetaExt, RawSettings{})
				if err != nil {
					t.Fatal(err)
				}
				before := hashersBack(0)
				r, err := c.NewReader(block)
				if err != nil {
					t.Fatal(err)
				}
				var read, nblk int
				var end error
				for {
					b, err := r.Next()
					if errors.Is(err, io.EOF) {
						break
					}
					if err != nil {
						end = err
						break
					}
					read += len(b.Samples)
					nblk++
					if nblk == 1 {
						if got := hashers() - before; got != tc.goroutines {
							t.Errorf("%d hashing goroutines, want %d", got, tc.goroutines)
						}
					}
					if nblk%7 == 3 {
						sum := sha256.Sum256(mod[:read*8])
						if got := r.SHA256(); got != hex.EncodeToString(sum[:]) {
							t.Fatalf("SHA256 after %d samples = %s, want %x", read, got, sum)
						}
					}
				}
				var ce *CaptureError
				if got := errors.As(end, &ce) && strings.Contains(end.Error(), "SHA-512"); got != tamper || (!tamper && end != nil) {
					t.Errorf("stream ended with %v; tampered = %v", end, tamper)
				}
				if tamper {
					if _, err := r.Next(); err != io.EOF {
						t.Errorf("Next after the mismatch: %v, want io.EOF", err)
					}
				}
				sum := sha256.Sum256(mod)
				if got := r.SHA256(); got != hex.EncodeToString(sum[:]) {
					t.Errorf("SHA256 = %s, want %x", got, sum)
				}
				if read != n {
					t.Errorf("%d samples delivered, want %d", read, n)
				}
				if s := sha512.Sum512(mod); (hex.EncodeToString(s[:]) == c.Meta.Global.SHA512) == tamper {
					t.Fatalf("test data: core:sha512 agreement %v with tampered=%v", !tamper, tamper)
				}
				r.Close()
				if got := hashersBack(before); got > before {
					t.Errorf("%d hashing goroutines after Close, %d before", got, before)
				}
			})
		}
	}
}

// TestReaderBuffersReused checks that a closed Reader's buffers serve the
// next Reader, whose blocks are right even though its buffers held another
// capture's samples (each block is decoded over them in full), and the
// free list's bounds.
func TestReaderBuffersReused(t *testing.T) {
	a := bytes.Repeat([]byte{0x00, 0x40, 0x00, 0xc0}, 1000) // +0.5, −0.5
	b := bytes.Repeat([]byte{0x00, 0x20, 0x00, 0x20}, 600)  // +0.25, +0.25
	r := NewReader(bytes.NewReader(a), "a", CI16LE, 256, 1000)
	if _, err := r.Next(); err != nil {
		t.Fatal(err)
	}
	r.Close()
	r = NewReader(bytes.NewReader(b), "b", CI16LE, 256, 600)
	defer r.Close()
	n := 0
	for {
		blk, err := r.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		for i, v := range blk.Samples {
			// Q15: code 0x2000 is 8192/32768 = 0.25.
			if v != complex(0.25, 0.25) {
				t.Fatalf("block at %d, sample %d = %v, want (0.25+0.25i)", blk.Start, i, v)
			}
		}
		n += len(blk.Samples)
	}
	if n != 600 {
		t.Errorf("read %d samples, want 600", n)
	}

	var p bufferPool[complex64]
	x := p.get(100)
	p.put(x)
	if y := p.get(100); &y[0] != &x[0] {
		t.Error("get after put did not return the buffer put")
	}
	for range maxPooledPerLength + 5 {
		p.put(make([]complex64, 100))
	}
	if got := len(p.free[100]); got != maxPooledPerLength {
		t.Errorf("%d buffers of one length kept, want at most %d", got, maxPooledPerLength)
	}
	for l := range maxPooledLengths + 3 {
		p.put(make([]complex64, 1000+l))
	}
	if got := len(p.free); got != maxPooledLengths {
		t.Errorf("%d lengths kept, want at most %d", got, maxPooledLengths)
	}
}
