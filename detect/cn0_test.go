package detect

import (
	"fmt"
	"slices"
	"testing"

	"quietband/ingest/synth"
)

// cn0Case runs three clean captures (to learn the site's spectral and
// C/N0 baselines) and then one capture with the given emitters and
// satellite attenuation, all with the GNSS meter on, and returns the
// results of the clean and of the test capture.
func cn0Case(t *testing.T, atten float64, em ...synth.Emitter) (clean, test *Result) {
	t.Helper()
	s := baseScenario(4e6, "ci16_le", 0.25)
	s.Seed = 21
	s.Captures = nil
	for i := 0; i < 4; i++ {
		s.Captures = append(s.Captures, synth.Capture{Name: fmt.Sprintf("c%d", i), DurationS: 0.25,
			Satellites: sky(), OffsetS: float64(i) * 60})
	}
	s.Captures[3].AttenuationDB = atten
	s.Captures[3].Emitters = em
	p := NewPipeline(Config{}, nil)
	p.GNSS = &GNSSMeter{}
	res := run(t, p, s)
	return res[2], res[3]
}

func meanCN0(sats []Satellite) map[int]float64 {
	m := map[int]float64{}
	for _, s := range sats {
		m[s.PRN] = s.CN0DBHz
	}
	return m
}

// measuredLoss is the mean C/N0 fall, PRN by PRN, between two captures.
func measuredLoss(t *testing.T, before, after []Satellite) float64 {
	t.Helper()
	b, a := meanCN0(before), meanCN0(after)
	var sum float64
	var n int
	for prn, v := range b {
		if w, ok := a[prn]; ok {
			sum += v - w
			n++
		}
	}
	if n == 0 {
		t.Fatal("no satellite common to both captures")
	}
	return sum / float64(n)
}

func byClass(evs []Event, class string) *Event {
	for i := range evs {
		if evs[i].Class == class {
			return &evs[i]
		}
	}
	return nil
}

// TestWidebandNoiseLowersCN0: a floor rise of R dB lowers C/N0 by R dB
// (with the noise density raised by 10^(R/10), C/N0 = C/N0_clean − R;
// REFERENCES §9 AGC relation and §7 for white interference), measured
// within 1 dB, and yields a wideband_noise and a cn0_drop event linked to
// each other.
func TestWidebandNoiseLowersCN0(t *testing.T) {
	for _, rise := range []float64{4, 6} {
		t.Run(fmt.Sprintf("%gdB", rise), func(t *testing.T) {
			clean, test := cn0Case(t, 0, synth.Emitter{Kind: synth.KindWidebandNoise, FloorRiseDB: rise})
			loss := measuredLoss(t, clean.Record.Stats.Satellites, test.Record.Stats.Satellites)
			within(t, "C/N0 loss", loss, rise, 1)
			wb, drop := byClass(test.Events, ClassWidebandNoise), byClass(test.Events, ClassCN0Drop)
			if wb == nil || drop == nil {
				t.Fatalf("want wideband_noise and cn0_drop, got %v", classes(test.Events))
			}
			if !slices.Contains(drop.Related, wb.ID) || !slices.Contains(wb.Related, drop.ID) {
				t.Errorf("events not linked: drop.related %v, wideband.related %v", drop.Related, wb.Related)
			}
			within(t, "cn0_drop drop_db", *drop.Params.DropDB, rise, 1)
			if wb.Impact == nil {
				t.Fatal("no impact on the wideband event")
			}
			within(t, "predicted loss", wb.Impact.CN0DegradationDB, rise, 1)
		})
	}
}

// TestAttenuatedAntennaDropsCN0Alone: satellites 6 dB down with no
// interference give a cn0_drop event and nothing else.
func TestAttenuatedAntennaDropsCN0Alone(t *testing.T) {
	clean, test := cn0Case(t, 6)
	if len(test.Events) != 1 || test.Events[0].Class != ClassCN0Drop {
		t.Fatalf("want one cn0_drop event, got %v", classes(test.Events))
	}
	within(t, "drop_db", *test.Events[0].Params.DropDB, 6, 1)
	within(t, "measured loss", measuredLoss(t, clean.Record.Stats.Satellites, test.Record.Stats.Satellites), 6, 1)
}

// TestCWLossMatchesImpact: for a CW of known J/N and frequency, the C/N0
// loss measured on the satellites agrees with the event's predicted
// impact (spectral separation coefficient with the C/A sinc² spectrum,
// Betz 2001) within 2 dB.
func TestCWLossMatchesImpact(t *testing.T) {
	for _, tc := range []struct{ off, jn float64 }{{600e3, 0}, {-250e3, -3}} {
		t.Run(fmt.Sprintf("%gkHz-%gdB", tc.off/1e3, tc.jn), func(t *testing.T) {
			clean, test := cn0Case(t, 0, synth.Emitter{Kind: synth.KindCW, Tones: []synth.Tone{{OffsetHz: tc.off, JNDB: tc.jn}}})
			cw := byClass(test.Events, ClassCW)
			if cw == nil || cw.Impact == nil {
				t.Fatalf("no cw event with impact among %v", classes(test.Events))
			}
			loss := measuredLoss(t, clean.Record.Stats.Satellites, test.Record.Stats.Satellites)
			t.Logf("predicted %.2f dB, measured %.2f dB", cw.Impact.CN0DegradationDB, loss)
			within(t, "measured loss vs prediction", loss, cw.Impact.CN0DegradationDB, 2)
		})
	}
}

func classes(evs []Event) []string {
	var out []string
	for _, e := range evs {
		out = append(out, fmt.Sprintf("%s(%.1f dB)", e.Class, e.JNDB))
	}
	return out
}
