package detect

import (
	"fmt"
	"math"
	"testing"

	"quietband/ingest/synth"
)

// TestPulsesAmongEmitters: pulses are looked for where they are, not only
// in the whole band's envelope. A DME-like pulse-pair beacon (ICAO Annex 10
// pair spacing 12 µs, 3.5 µs pulses) beside a CW 20 dB over the noise, or
// beside band-limited noise; a weak beacon beside a strong one on another
// channel; pulses whose carrier hops from pulse to pulse over channels
// 3 MHz apart (as L5-band data links do): each pulsed emitter is found
// with its own frequency (within 100 kHz), PRI within 1 %, width within
// 10 % (the tolerances), peak J/N within 1.5 dB (the sub-band
// filter keeps the pulse's main lobe; a tolerance of this project), and
// nothing else is reported. The truth is the synthesizer's, at 10 MS/s
// (an L5 or wide L1 recorder).
func TestPulsesAmongEmitters(t *testing.T) {
	const fs = 10e6
	type want struct {
		class                  string
		offset, jn, pri, width float64
		channels               []float64
	}
	dme := func(jn, pri, off float64) synth.Emitter {
		return synth.Emitter{Kind: synth.KindPulsed, Pulse: "gaussian_pair", JNDB: jn, PRIS: pri, OffsetHz: off}
	}
	for _, tc := range []struct {
		name string
		em   []synth.Emitter
		want []want
	}{
		{"beacon beside a strong CW", []synth.Emitter{dme(14, 370e-6, -1e6), {Kind: synth.KindCW, JNDB: 20, OffsetHz: 3e6}},
			[]want{{ClassPulsed, -1e6, 14, 370e-6, 3.5e-6, nil}, {ClassCW, 3e6, 20, 0, 0, nil}}},
		{"weak beacon beside a strong one", []synth.Emitter{dme(22, 270e-6, 2e6), dme(12, 830e-6, -2e6)},
			[]want{{ClassPulsed, 2e6, 22, 270e-6, 3.5e-6, nil}, {ClassPulsed, -2e6, 12, 830e-6, 3.5e-6, nil}}},
		{"beacon beside band noise", []synth.Emitter{dme(14, 370e-6, -1e6),
			{Kind: synth.KindNarrowbandNoise, JNDB: 10, OffsetHz: 2.5e6, BandwidthHz: 1e6}},
			[]want{{ClassPulsed, -1e6, 14, 370e-6, 3.5e-6, nil}, {ClassNarrowbandNoise, 2.5e6, 10, 0, 0, nil}}},
		{"hopping over three channels", []synth.Emitter{{Kind: synth.KindPulsed, Pulse: "rect", WidthS: 6.4e-6, JNDB: 15,
			PRIS: 130e-6, ChannelsHz: []float64{-3e6, 0, 3e6}}},
			[]want{{ClassPulsed, 0, 15, 130e-6, 6.4e-6, []float64{-3e6, 0, 3e6}}}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			evs := detectOne(t, fs, "ci16_le", 0.25, 3, tc.em...)
			if len(evs) != len(tc.want) {
				for _, e := range evs {
					t.Logf("%s %.0f Hz J/N %.1f dB", e.Class, e.OffsetHz, e.JNDB)
				}
				t.Fatalf("%d events, want %d", len(evs), len(tc.want))
			}
			for _, w := range tc.want {
				var ev *Event
				for i := range evs {
					if evs[i].Class == w.class && math.Abs(evs[i].OffsetHz-w.offset) < 100e3 {
						ev = &evs[i]
					}
				}
				if ev == nil {
					t.Errorf("no %s event at %.0f Hz", w.class, w.offset)
					continue
				}
				tol := 1.5
				if w.class != ClassPulsed {
					tol = 1
				}
				within(t, fmt.Sprintf("%s J/N dB", w.class), ev.JNDB, w.jn, tol)
				if w.class != ClassPulsed {
					continue
				}
				p := ev.Params
				within(t, "PRI", *p.PRIS, w.pri, 0.01*w.pri)
				within(t, "pulse width", *p.PulseWidthS, w.width, 0.1*w.width)
				if len(p.ChannelsHz) != len(w.channels) {
					t.Errorf("channels %v, want %v", p.ChannelsHz, w.channels)
					continue
				}
				for i, c := range w.channels {
					within(t, "channel", p.ChannelsHz[i], c, 50e3)
				}
			}
		})
	}
}
