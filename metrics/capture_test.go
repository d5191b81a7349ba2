package metrics

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil"

	"quietband/detect"
	"quietband/ingest"
)

// toneCapture writes a raw ci8 capture of n samples at 1 MS/s: complex
// white Gaussian noise of power 0.02 of full scale and, over samples
// [on, off), a tone of amplitude 0.1 at +187.5 kHz (J/N −3 dB over the
// band, about 21 dB over the noise in its bin of a 256-point FFT:
// computed, 0.01 against 0.02/256).
func toneCapture(t *testing.T, path string, seed uint64, n, on, off int) *ingest.Capture {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 7))
	b := make([]byte, 2*n)
	q := func(v float64) byte { return byte(int8(max(-127, min(127, math.Round(v*128))))) }
	for i := range n {
		re, im := 0.1*rng.NormFloat64(), 0.1*rng.NormFloat64()
		if i >= on && i < off {
			s, c := math.Sincos(2 * math.Pi * 187.5e3 / 1e6 * float64(i))
			re, im = re+0.1*c, im+0.1*s
		}
		b[2*i], b[2*i+1] = q(re), q(im)
	}
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	c, err := ingest.Open(path, ingest.RawSettings{SampleRate: 1e6, Start: time.Date(2026, 5, 1, 6, 0, int(seed), 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	return c
}

// TestActiveFollowsThePipeline: quietband_interference_active follows the
// pipeline's one "open at the end" (detect.Event.OpenAtEnd), the same on
// which it continues an episode: a tone through the whole capture is
// active, whether the capture's last block had a spectral pass (54 152
// samples: 20 frames of 256 in the last block of 64) or was too short for
// one (20 000 samples: 14 frames); the next capture's tone continues its
// episode; a tone that stopped half way (in the longer captures: the
// shorter has one full block only, and what the short block after it
// cannot show is taken as still there), or a clean capture, clears it.
func TestActiveFollowsThePipeline(t *testing.T) {
	for _, n := range []int{20000, 54152} {
		t.Run(fmt.Sprint(n), func(t *testing.T) {
			dir := t.TempDir()
			s := New(Options{Inputs: []string{"roof"}})
			p := detect.NewPipeline(detect.Config{}, nil)
			active := func() float64 { return testutil.ToFloat64(s.active.WithLabelValues("roof", detect.ClassCW)) }
			var episode string
			steps := []struct {
				on, off int
				open    bool
			}{{0, n, true}, {0, n, true}, {0, n / 2, false}, {0, 0, false}, {0, n, true}}
			for i, st := range steps {
				if n < 2*p.BlockLen(1e6) && st.off == n/2 {
					continue
				}
				c := toneCapture(t, filepath.Join(dir, fmt.Sprintf("c%d.ci8", i)), uint64(i+1), n, st.on, st.off)
				res, err := p.Process(context.Background(), c, c.Name)
				if err != nil {
					t.Fatal(err)
				}
				s.ObserveCapture(Capture{Input: "roof", Record: res.Record, Events: res.Events, At: time.Now()})
				var cw []detect.Event
				for _, e := range res.Events {
					if e.Class == detect.ClassCW {
						cw = append(cw, e)
					}
				}
				if want := st.off > st.on; (len(cw) == 1) != want {
					t.Fatalf("step %d: %d cw events, want a tone %v", i, len(cw), want)
				}
				if got := active(); got != map[bool]float64{true: 1}[st.open] {
					t.Errorf("step %d: cw active %v, want open %v", i, got, st.open)
				}
				if len(cw) == 1 {
					if cw[0].OpenAtEnd != st.open {
						t.Errorf("step %d: OpenAtEnd %v, want %v", i, cw[0].OpenAtEnd, st.open)
					}
					if i == 1 && cw[0].Episode != episode {
						t.Errorf("step 1: the tone's episode %s, want the previous capture's %s", cw[0].Episode, episode)
					}
					episode = cw[0].Episode
				}
			}
		})
	}
}
