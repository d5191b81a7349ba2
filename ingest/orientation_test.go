package ingest

import (
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestOrientation: the setting's words, and a Reader that hands out the
// complex conjugate of every sample when the input is set inverted (an
// I/Q swap mirrors the spectrum, REFERENCES §12.2; conjugation mirrors it
// back, the constant j of the swap being a phase), the SHA-256 of the
// file's bytes unchanged.
func TestOrientation(t *testing.T) {
	for _, tc := range []struct {
		in   string
		want Orientation
		err  bool
	}{{"", OrientationAuto, false}, {"auto", OrientationAuto, false}, {"upright", OrientationUpright, false},
		{"inverted", OrientationInverted, false}, {"swapped", OrientationAuto, true}, {"Inverted", OrientationAuto, true}} {
		got, err := ParseOrientation(tc.in)
		if (err != nil) != tc.err || got != tc.want {
			t.Errorf("ParseOrientation(%q) = %v, %v", tc.in, got, err)
		}
		if err != nil && !strings.Contains(err.Error(), "inverted") {
			t.Errorf("ParseOrientation(%q): error %q does not say what to give", tc.in, err)
		}
	}
	path := filepath.Join(t.TempDir(), "cap.ci8")
	raw := make([]byte, 2*5000)
	for i := range raw {
		raw[i] = byte(i*37 + i/7)
	}
	os.WriteFile(path, raw, 0o644)
	read := func(o Orientation) ([]complex64, string) {
		c, err := Open(path, RawSettings{SampleRate: 1e6, Spectrum: o})
		if err != nil {
			t.Fatal(err)
		}
		r, err := c.NewReader(1024)
		if err != nil {
			t.Fatal(err)
		}
		defer r.Close()
		var out []complex64
		for {
			b, err := r.Next()
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			out = append(out, b.Samples...)
		}
		return out, r.SHA256()
	}
	up, shaUp := read(OrientationUpright)
	inv, shaInv := read(OrientationInverted)
	if len(up) != 5000 || len(inv) != 5000 {
		t.Fatalf("%d and %d samples, want 5000", len(up), len(inv))
	}
	for i := range up {
		if inv[i] != complex(real(up[i]), -imag(up[i])) {
			t.Fatalf("sample %d: %v inverted, %v upright", i, inv[i], up[i])
		}
	}
	if shaUp != shaInv {
		t.Error("the SHA-256 depends on the orientation")
	}
}
