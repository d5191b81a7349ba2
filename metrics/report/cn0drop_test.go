package report

import (
	"testing"

	"quietband/detect"
)

// Issue 18 item 2: the report gave a C/N0 drop (a blocked sky) a J/N, as
// if it were interference. Its row shows no J/N and the measured drop as
// its C/N0 loss; an interference keeps its J/N.
func TestBlockedSkyRowHasNoJN(t *testing.T) {
	drop := 9.6
	for _, tc := range []struct {
		e        detect.Event
		jn, loss string
	}{
		{detect.Event{Class: detect.ClassCN0Drop, JNDB: 9.2, Params: detect.Params{DropDB: &drop}}, "–", "9.6"},
		{detect.Event{Class: detect.ClassCW, JNDB: 12.34, Impact: &detect.Impact{CN0DegradationDB: 3.21}}, "12.3", "3.2"},
	} {
		row := eventRowOf(0, tc.e)
		if row.JN != tc.jn || row.Loss != tc.loss {
			t.Errorf("%s: J/N %q, C/N0 loss %q; want %q, %q", tc.e.Class, row.JN, row.Loss, tc.jn, tc.loss)
		}
		var acc classAcc
		acc.add(tc.e, 1)
		if acc.hasJN != (tc.jn != "–") {
			t.Errorf("%s: the class summary's worst J/N counted: %v", tc.e.Class, acc.hasJN)
		}
	}
}
