package detect

import (
	"fmt"
	"math"
	"slices"
)

// KnownEmitter is an emitter a site knows is there and accepts: its own
// front end's spur, a beacon or radar of the neighbourhood, a licensed
// pseudolite. Its events are reported and logged as always, with
// `known: true` (and the entry's label), and raise no alert: the
// operator's alarm stays for what is new.
//
// A known emitter is given by class and absolute RF frequency with a
// tolerance: an event matches when its class is the entry's and its RF
// centre (capture centre + offset) is within the tolerance, and, for cw,
// when every one of its tones is within the tolerance of a known cw entry
// (a new tone beside a known spur is not known). Captures whose centre
// frequency is unknown match nothing.
type KnownEmitter struct {
	// Class is the event class (cw, swept, pulsed, narrowband_noise,
	// wideband_noise); cn0_drop and spoofing are statements about the
	// satellites and are never "known".
	Class string `yaml:"class" json:"class"`
	// FrequencyHz is the emitter's RF centre, Hz (e.g. 1575.93e6).
	FrequencyHz float64 `yaml:"frequency_hz" json:"frequency_hz"`
	// ToleranceHz is how far from FrequencyHz the event's centre may lie,
	// Hz (a spur drifts with its oscillator: a 2 ppm reference moves a
	// line at L1 by about 3 kHz, common practice).
	ToleranceHz float64 `yaml:"tolerance_hz" json:"tolerance_hz"`
	// Label names it in the records and the report (optional).
	Label string `yaml:"label" json:"label,omitempty"`
}

// validate checks one entry.
func (k KnownEmitter) validate() error {
	switch {
	case !slices.Contains(Classes, k.Class) || k.Class == ClassCN0Drop || k.Class == ClassSpoofing:
		return fmt.Errorf("known emitter %q: class %q must be one of cw, swept, pulsed, narrowband_noise, wideband_noise", k.Label, k.Class)
	case !(k.FrequencyHz > 0) || math.IsInf(k.FrequencyHz, 0):
		return fmt.Errorf("known emitter %q: frequency_hz %g must be an RF frequency in Hz above 0", k.Label, k.FrequencyHz)
	case !(k.ToleranceHz > 0) || math.IsInf(k.ToleranceHz, 0):
		return fmt.Errorf("known emitter %q: tolerance_hz %g must be above 0 Hz", k.Label, k.ToleranceHz)
	}
	return nil
}

// knownAs returns the label of the known emitter e is (the first entry
// that matches; "" for an entry without a label) and whether it is one.
func knownAs(e *Event, known []KnownEmitter, center float64, hasCenter bool) (string, bool) {
	if len(known) == 0 || !hasCenter {
		return "", false
	}
	near := func(k *KnownEmitter, rf float64) bool {
		return k.Class == e.Class && math.Abs(rf-k.FrequencyHz) <= k.ToleranceHz
	}
	if e.Class == ClassCW && len(e.Params.Tones) > 0 {
		label := ""
		for _, t := range e.Params.Tones {
			i := slices.IndexFunc(known, func(k KnownEmitter) bool { return near(&k, center+t.OffsetHz) })
			if i < 0 {
				return "", false
			}
			if label == "" {
				label = known[i].Label
			}
		}
		return label, true
	}
	i := slices.IndexFunc(known, func(k KnownEmitter) bool { return near(&k, center+e.OffsetHz) })
	if i < 0 {
		return "", false
	}
	return known[i].Label, true
}
