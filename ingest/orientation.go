package ingest

import "fmt"

// Orientation is how a capture's spectrum is to be read: decided from the
// satellites (OrientationAuto, the default), or set by the input's
// configuration when the recorder is known to swap I and Q (or not).
//
// A complex recorder whose I and Q are swapped records s*(t)·j instead of
// s(t): its spectrum is mirrored about the centre, an emitter at +f shows
// at −f and every satellite's carrier Doppler has the wrong sign while its
// code Doppler does not (REFERENCES §12.2). The satellite meter finds that
// from the satellites themselves; an input set to OrientationInverted has
// its samples conjugated by the Reader before any detector sees them (the
// constant j is a phase, which no detector uses), so that emitters'
// offsets, the satellites and the record are all on the upright spectrum
// from the first capture on, and the meter does not test it.
type Orientation uint8

// Orientations.
const (
	OrientationAuto Orientation = iota
	OrientationUpright
	OrientationInverted
)

// String is "auto", "upright" or "inverted".
func (o Orientation) String() string {
	switch o {
	case OrientationUpright:
		return "upright"
	case OrientationInverted:
		return "inverted"
	}
	return "auto"
}

// ParseOrientation parses "auto" (or ""), "upright" or "inverted".
func ParseOrientation(s string) (Orientation, error) {
	switch s {
	case "", "auto":
		return OrientationAuto, nil
	case "upright":
		return OrientationUpright, nil
	case "inverted":
		return OrientationInverted, nil
	}
	return OrientationAuto, fmt.Errorf("spectrum %q: use auto (decided from the satellites), upright, or inverted (I and Q swapped: the samples are conjugated before analysis)", s)
}

// conjugate sets x[i] to its complex conjugate.
func conjugate(x []complex64) {
	for i, v := range x {
		x[i] = complex(real(v), -imag(v))
	}
}
