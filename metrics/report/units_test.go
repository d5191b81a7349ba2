package report

import (
	"strings"
	"testing"

	"quietband/detect"
)

// Issue 18 item 8: numbers like 1.6e+11 Hz/s, 1575.420000 MHz, -0.0 dB,
// "1 emitters", "677 pulse arrivals" beside "1352 pulses", center_hz as
// 1.5754600255878663e+09 in the CSV. People read engineering units with
// sensible precision; the CSV keeps full precision in plain notation.
func TestNumbersInEngineeringUnits(t *testing.T) {
	for _, tc := range []struct{ got, want string }{
		{SI(1.6e11, "Hz/s"), "160 GHz/s"},
		{SI(4e6, "S/s"), "4 MS/s"},
		{SI(999.7, "Hz"), "1 kHz"},
		{SI(-2.5e3, "Hz"), "-2.5 kHz"},
		{MHz(1575.42e6), "1575.42 MHz"},
		{MHz(1575.4600255878663e6), "1575.460026 MHz"},
		{f1(-0.04), "0.0"},
		{signed(-0.001, 2), "0.00"},
		{signed(1.234, 2), "+1.23"},
		{Count(1, "emitter"), "1 emitter"},
		{Count(0, "emitter"), "0 emitters"},
		{PulseArrivals(&Summary{PulsesSeen: 676, PairsSeen: 676}), "1352 pulses detected (676 pairs)"},
		{PulseArrivals(&Summary{PulsesSeen: 12}), "12 pulses detected"},
	} {
		if tc.got != tc.want {
			t.Errorf("got %q, want %q", tc.got, tc.want)
		}
	}
	rate := 1.6e11
	if d := Detail(detect.Event{Class: detect.ClassSwept, Params: detect.Params{SweepRateHzPerS: &rate}}); !strings.Contains(d, "160 GHz/s") {
		t.Errorf("sweep detail %q", d)
	}
	c := 1575.4600255878663e9 / 1e3
	row := CSVRow(detect.Event{Class: detect.ClassCW, CenterHz: &c, JNDB: 1e-7})
	for _, cell := range row {
		if strings.ContainsAny(cell, "eE") && !strings.ContainsAny(cell, "abcdfghijklmnopqrstuvwxyz") {
			t.Errorf("CSV cell %q in exponent notation", cell)
		}
	}
	if row[10] != "1575460025.5878663" {
		t.Errorf("center_hz %q, want 1575460025.5878663 (full precision, plain)", row[10])
	}
}
