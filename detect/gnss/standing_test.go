package gnss

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"quietband/ingest/gpsca"
)

// TestStandingCode checks the code-drift test against the relation it
// rests on: a satellite's code Doppler is f_D/1540 chips/s at L1
// (REFERENCES §11.4), which the carrier-aided NCO supplies, so its drift
// against the NCO is 0; a correlation fixed in the receiver's time
// drifts by −f_D/1540; a satellite tracked in the wrong orientation by
// −2·f_D/1540 (REFERENCES §12.2). Channel states as Tracker.Channels
// gives them (drift and its standard error in chips/s, over 200 epochs).
func TestStandingCode(t *testing.T) {
	ch := func(fd, drift, sd float64) ChannelState {
		return ChannelState{DopplerHz: fd, DriftErr: drift, DriftVar: sd * sd, DriftEpochs: 200, CN0dBHz: 45, CN0OK: true, Prompts: 190}
	}
	for _, tc := range []struct {
		name string
		c    ChannelState
		want bool
	}{
		{"satellite at 3 kHz", ch(3000, 0.2, 0.1), false},
		{"satellite at −4 kHz, 3σ off", ch(-4000, -0.3, 0.1), false},
		{"standing at 3 kHz", ch(3000, -3000.0/1540, 0.1), true},
		{"standing at −5 kHz, the loop slipping (½)", ch(-5000, 0.5*5000/1540, 0.1), true},
		{"standing at 1 kHz, not resolved", ch(1000, -1000.0/1540, 0.2), false},
		{"wrong orientation at 3 kHz", ch(3000, -6000.0/1540, 0.1), false},
		{"too few epochs", ChannelState{DopplerHz: 3000, DriftErr: -2, DriftVar: 0.01, DriftEpochs: 20}, false},
	} {
		if got := standingCode(tc.c); got != tc.want {
			t.Errorf("%s: standing %v, want %v", tc.name, got, tc.want)
		}
	}
	// Line grid: one standing channel at +3002 Hz puts the interferer's
	// lines at 2 Hz modulo 1 kHz. A channel at −998 Hz whose drift cannot
	// be told from −f_D/1540 joins it; so does one at +4010 Hz moving with
	// its carrier but within gridFloorDB of the noise floor, and one at
	// −1998 Hz whose drift lies 3.1 standard errors from 0 (a loop
	// slipping on the interferer's correlation); a satellite at +4010 Hz
	// moving with its carrier well above the floor, and one at −698 Hz
	// (off the grid), stay.
	floor := trackFloor(190)
	chans := []ChannelState{ch(3002, -3002.0/1540, 0.1), ch(-998, 0.5, 0.2), ch(4010, 0, 0.1), ch(4010, 0, 0.1), ch(-698, 0.4, 0.2),
		ch(-1998, 0.31, 0.1)}
	chans[2].CN0dBHz = floor + gridFloorDB - 1
	got := standingChannels(chans)
	if want := []bool{true, true, true, false, false, true}; !slices.Equal(got, want) {
		t.Errorf("grid: standing %v, want %v", got, want)
	}
}

// TestStandingSweep: the in-band sweep of the interference bank (±1.2 MHz
// every 100 µs: lines every 10 kHz, so on the C/A codes' 1 kHz grid) at
// J/N −6 and 2 dB, where mitigation does not remove it (at −6 dB it
// excises nothing) and its correlation with the codes makes peaks at
// whole-kHz Dopplers: no PRN outside the sky is reported, the PRNs
// rejected are listed with the note that says why, and satellites of
// 45 dB-Hz and more are still found. Two 0.25 s captures at 4 MS/s per
// level, each after a clean capture of the site (TestIssue14LowJN runs
// the whole bank with QUIETBAND_LONG=1).
func TestStandingSweep(t *testing.T) {
	const fs = 4e6
	in := bank[slices.IndexFunc(bank, func(b interferer) bool { return b.name == "sweep-inband-100us" })]
	for _, jn := range []float64{-6, 2} {
		t.Run(fmt.Sprintf("%gdB", jn), func(t *testing.T) {
			rng := rand.New(rand.NewPCG(1411, uint64(jn+10)))
			standing, found, strong := 0, 0, 0
			for range 2 {
				sats := skyWithClock(rng, []float64{38, 42, 45, 48, 50}, 0)
				m := NewMeter(MeterConfig{Acq: AcqConfig{Pfa: pipelinePfa}})
				measure(t, m, fs, synthesize(rng, fs, gpsca.L1, 1, int(0.03*fs), sats).x, 65536)
				c := synthesize(rng, fs, gpsca.L1, 1, int(0.25*fs), sats)
				in.add(rng, c.x, fs, 1, jn)
				r := measure(t, m, fs, c.x, 65536)
				for _, s := range r.Satellites {
					if !slices.ContainsFunc(sats, func(w satSpec) bool { return w.prn == s.PRN }) {
						t.Errorf("false PRN %+v", s)
					}
				}
				for _, s := range sats {
					if s.cn0 >= 45 {
						strong++
						if slices.ContainsFunc(r.Satellites, func(m Measured) bool { return m.PRN == s.prn }) {
							found++
						}
					}
				}
				standing += len(r.Standing)
				note := slices.ContainsFunc(r.Notes, func(n string) bool { return strings.Contains(n, "stood still in the receiver's time") })
				if note != (len(r.Standing) > 0) {
					t.Errorf("%d PRNs rejected, note %v: %q", len(r.Standing), note, r.Notes)
				}
			}
			t.Logf("%d PRNs rejected as standing; %d of %d satellites ≥ 45 dB-Hz found", standing, found, strong)
			if standing == 0 || found < strong-1 {
				t.Errorf("%d PRNs rejected as standing (want some), %d of %d satellites ≥ 45 dB-Hz found", standing, found, strong)
			}
		})
	}
}
