package detect

import (
	"time"
)

// Event classes of the event log (DESIGN.md; classes may be added, never
// renamed).
const (
	ClassCW              = "cw"
	ClassSwept           = "swept"
	ClassPulsed          = "pulsed"
	ClassWidebandNoise   = "wideband_noise"
	ClassNarrowbandNoise = "narrowband_noise"
	ClassCN0Drop         = "cn0_drop"
	// ClassSpoofing: the satellites of the capture are not what they seem
	// (counterfeit signals or a meacon; see Spoofing).
	ClassSpoofing = "spoofing"
)

// Classes lists the event classes in a stable order.
var Classes = []string{ClassCW, ClassSwept, ClassPulsed, ClassWidebandNoise, ClassNarrowbandNoise, ClassCN0Drop, ClassSpoofing}

// Event is one detected interference within one capture: the body of a
// `kind: "event"` record of the event log. Field names are the log's
// contract.
type Event struct {
	ID      string `json:"id"`
	Episode string `json:"episode"`
	Class   string `json:"class"`
	Capture string `json:"capture"`
	// Input is the daemon's watched folder the capture was found in, as
	// on its capture record (issue 17, item 6: two antennas' folders may
	// hold the same names); empty for replay's paths.
	Input       string   `json:"input,omitempty"`
	SampleStart int64    `json:"sample_start"`
	SampleCount int64    `json:"sample_count"`
	Start       Time     `json:"start"`
	End         Time     `json:"end"`
	OffsetHz    float64  `json:"offset_hz"`
	CenterHz    *float64 `json:"center_hz,omitempty"`
	BandwidthHz float64  `json:"bandwidth_hz"`
	JNDB        float64  `json:"jn_db"`
	PowerDBFS   float64  `json:"power_dbfs"`
	Params      Params   `json:"params"`
	Impact      *Impact  `json:"impact,omitempty"`
	Detectors   []string `json:"detectors"`
	// Related lists the ids of events of this capture that overlap this
	// one in time and that the classifier links to it (a cn0_drop and the
	// interference that explains it).
	Related []string `json:"related,omitempty"`
	// Known says that the site's configuration lists this emitter as
	// known (Config.KnownEmitters): it is logged as always and raises no
	// alert. KnownAs is the entry's label, when it has one.
	Known   bool   `json:"known,omitempty"`
	KnownAs string `json:"known_as,omitempty"`
	// OpenAtEnd says that the interference was still present at the end
	// of the capture (see Pipeline.Process): its episode goes on into the
	// input's next capture, and the daemon shows it as active until a
	// capture without it. In the record (open_at_end, added for issue 18)
	// so that a restarted daemon shows what was active when it stopped.
	OpenAtEnd bool `json:"open_at_end,omitempty"`
}

// Params holds the class-specific parameters; only those of the event's
// class are set.
type Params struct {
	// cw
	Tones []ToneParam `json:"tones,omitempty"`
	// swept
	SweepPeriodS    *float64 `json:"sweep_period_s,omitempty"`
	SweepLowHz      *float64 `json:"sweep_low_hz,omitempty"`
	SweepHighHz     *float64 `json:"sweep_high_hz,omitempty"`
	SweepRateHzPerS *float64 `json:"sweep_rate_hz_per_s,omitempty"`
	Shape           string   `json:"shape,omitempty"`
	// SweepSpanHz is the whole span swept, and SpanExceedsBand says that
	// it reaches beyond the capture's band: then sweep_low_hz and
	// sweep_high_hz bound the part seen, and the span comes from the rate
	// and the period.
	SweepSpanHz     *float64 `json:"sweep_span_hz,omitempty"`
	SpanExceedsBand bool     `json:"span_exceeds_band,omitempty"`
	// PeriodIsLowerBound says that a sweep slower than the capture shows
	// did not fly back twice in it: sweep_period_s is the time the span
	// seen took, and the true period is at least that.
	PeriodIsLowerBound bool     `json:"period_is_lower_bound,omitempty"`
	PulseWidthS        *float64 `json:"pulse_width_s,omitempty"`
	PRIS               *float64 `json:"pri_s,omitempty"`
	DutyCycle          *float64 `json:"duty_cycle,omitempty"`
	Pulses             *int     `json:"pulses,omitempty"`
	PairSpacingS       *float64 `json:"pair_spacing_s,omitempty"`
	// ChannelsHz are the carrier offsets of a pulsed emitter that hops
	// from pulse to pulse over several channels.
	ChannelsHz     []float64 `json:"channels_hz,omitempty"`
	FloorRiseDB    *float64  `json:"floor_rise_db,omitempty"`
	DropDB         *float64  `json:"drop_db,omitempty"`
	BaselineDBHz   *float64  `json:"baseline_dbhz,omitempty"`
	CN0DBHz        *float64  `json:"cn0_dbhz,omitempty"`
	PRNs           []int     `json:"prns,omitempty"`
	SatellitesLost []int     `json:"satellites_lost,omitempty"`
	// spoofing (DESIGN.md): Kind is counterfeit or meaconing; Indicators
	// each indicator that fired with its value (see Spoofing);
	// PowerOverAuthenticDB the false signals' power over the authentic
	// ones; DelayChips a meacon's common delay; Peaks, for the analyst's
	// report, each PRN's two correlation peaks and the correlation power
	// around them.
	Kind                 string             `json:"kind,omitempty"`
	Indicators           map[string]float64 `json:"indicators,omitempty"`
	PowerOverAuthenticDB *float64           `json:"power_over_authentic_db,omitempty"`
	DelayChips           *float64           `json:"delay_chips,omitempty"`
	Peaks                []PeakPair         `json:"peaks,omitempty"`
}

// PeakPair is one PRN of a spoofing event: its two correlation peaks
// (the first the stronger) and the correlation power against code phase
// around them.
type PeakPair struct {
	PRN    int      `json:"prn"`
	First  PeakInfo `json:"first"`
	Second PeakInfo `json:"second"`
	// DelayChips is the second peak's arrival delay after the first
	// (chips, negative: earlier); SecondDB its power over the first's.
	DelayChips float64 `json:"delay_chips"`
	SecondDB   float64 `json:"second_db"`
	// Profile: the correlation power over the noise (dB) against arrival
	// delay relative to the first peak, one segment per Doppler row.
	Profile []ProfileSegment `json:"profile"`
}

// PeakInfo is one correlation peak.
type PeakInfo struct {
	CodePhaseChips float64 `json:"code_phase_chips"`
	DopplerHz      float64 `json:"doppler_hz"`
	// SNRDB is the peak's signal power over the noise of one 1 ms
	// correlation, 10·log10(C/N0·T) (add 30 for dB-Hz).
	SNRDB float64 `json:"snr_db"`
}

// ProfileSegment is the correlation power around a peak in one Doppler
// row: PowerDB[i] at StartChips + i·StepChips of arrival delay relative
// to the first peak.
type ProfileSegment struct {
	DopplerHz  float64   `json:"doppler_hz"`
	StartChips float64   `json:"start_chips"`
	StepChips  float64   `json:"step_chips"`
	PowerDB    []float32 `json:"power_db"`
}

// ToneParam is one tone of a cw event.
type ToneParam struct {
	OffsetHz float64 `json:"offset_hz"`
	JNDB     float64 `json:"jn_db"`
}

// Impact is the predicted effect of an event on a GPS L1 C/A receiver.
type Impact struct {
	CN0DegradationDB float64 `json:"cn0_degradation_db"`
}

// CaptureRecord is the body of a `kind: "capture"` record: written after
// the capture's events, it marks the capture done.
type CaptureRecord struct {
	Capture string `json:"capture"`
	// Input is the daemon's watched folder (its name, the metrics' input
	// label) the capture was found in; empty for replay's paths. With
	// it a restarted daemon restores each input's live state from its
	// latest capture in the log.
	Input  string `json:"input,omitempty"`
	SHA256 string `json:"sha256,omitempty"`
	// MetadataSHA256 is a SigMF capture's ingest.Meta.ReadingSHA256: the
	// SHA-256 of its metadata's global object and captures array, how its
	// samples are read (annotations left out). With Input, Capture and
	// SHA256 it is the capture's identity: corrected metadata makes a
	// capture analysed again (issue 17, item 7). Absent for raw files and
	// captures whose metadata could not be read.
	MetadataSHA256 string  `json:"metadata_sha256,omitempty"`
	Format         string  `json:"format,omitempty"`
	SampleRate     float64 `json:"sample_rate_hz,omitempty"`
	// AnalysisRateHz is the rate the detectors worked at when it differs
	// from the file's (real samples at an IF, turned into complex
	// baseband at half the rate); IFHz and LOSide say how.
	AnalysisRateHz *float64 `json:"analysis_rate_hz,omitempty"`
	IFHz           *float64 `json:"if_hz,omitempty"`
	LOSide         string   `json:"lo_side,omitempty"`
	CenterHz       *float64 `json:"center_hz,omitempty"`
	Start          *Time    `json:"start,omitempty"`
	// TimeSource says where start (and so every event time) came from:
	// "core:datetime", "settings" (a raw input's configured start) or
	// "file modification time" (a raw file's, less its duration: a guess);
	// absent when the capture has no time, and its events' times are then
	// the zero time (issue 18 item 7).
	TimeSource string `json:"time_source,omitempty"`
	Samples    int64  `json:"samples"`
	Status     string `json:"status"`
	Error      string `json:"error,omitempty"`
	Events     int    `json:"events"`
	Stats      *Stats `json:"stats,omitempty"`
	// Config is the fingerprint of the effective detection configuration
	// and code version the capture was analysed with (Pipeline.Fingerprint,
	// folded into the event ids too): a capture with this SHA-256 and this
	// fingerprint is already recorded, and appending it again to the same
	// log records nothing new (issue 18 item 5).
	Config string `json:"config_fingerprint,omitempty"`
	// Fault, when set, says that the front end, not the sky, explains the
	// samples (an ok capture may carry one: what could be analysed was).
	Fault *Fault `json:"fault,omitempty"`
	// Notes name, one plain sentence each, every stage that was not run
	// on this capture (or not in full) and why.
	Notes []string `json:"notes,omitempty"`
}

// Front-end fault kinds of a capture record.
const (
	FaultDead         = "dead"         // every sample zero
	FaultStuck        = "stuck"        // every sample the same non-zero value
	FaultGap          = "gap"          // a run of zeros or a sample drop inside the capture
	FaultUnnormalised = "unnormalised" // float samples far beyond full scale
)

// Fault is a front-end fault found in a capture.
type Fault struct {
	Kind   string `json:"kind"`
	Detail string `json:"detail"`
}

// Capture statuses.
const (
	StatusOK          = "ok"
	StatusQuarantined = "quarantined"
)

// Stats summarise a whole capture.
type Stats struct {
	PowerDBFS      float64 `json:"power_dbfs"`
	NoiseFloorDBFS float64 `json:"noise_floor_dbfs"`
	AGCDeviationDB float64 `json:"agc_deviation_db"`
	// PowerOverBaselineDB is the capture's total in-band power over the
	// site baseline's, 10·log10(P/P_base) dB: what a receiver's AGC would
	// follow (Bastide et al. 2003), not the noise floor. It is
	// agc_deviation_db under a name that says what it is (issue 18; the
	// old field stays for readers of the log), absent while no baseline
	// power is known (agc_deviation_db reads 0 then).
	PowerOverBaselineDB *float64    `json:"power_over_baseline_db,omitempty"`
	SKMax               float64     `json:"sk_max"`
	ClipFraction        float64     `json:"clip_fraction"`
	KurtosisRatio       float64     `json:"kurtosis_ratio"`
	Baseline            string      `json:"baseline"` // "learning", "learned" or "loaded"
	Satellites          []Satellite `json:"satellites"`
	GNSSSkipped         string      `json:"gnss_skipped,omitempty"`
	// Quantization names the few levels a low-bit front end's samples
	// take ("2-bit: levels ±1, ±3"), and OccupancyLevelDB the input level
	// read from the magnitude-bit occupancy (REFERENCES §12.3: σ over the
	// quantizer's threshold, dB), a scale that means something where
	// dBFS of a few levels does not.
	Quantization     string   `json:"quantization,omitempty"`
	OccupancyLevelDB *float64 `json:"occupancy_level_db,omitempty"`
	// ClockOffsetHz is the receiver's common Doppler offset, when
	// satellites were measured.
	ClockOffsetHz *float64 `json:"clock_offset_hz,omitempty"`
	// SpectrumInverted says whether the capture's spectrum was found (or
	// configured) inverted; nil when it could not be determined.
	SpectrumInverted *bool `json:"spectrum_inverted,omitempty"`
}

// Satellite is one satellite measured in a capture.
type Satellite struct {
	System         string  `json:"system"`
	PRN            int     `json:"prn"`
	CN0DBHz        float64 `json:"cn0_dbhz"`
	DopplerHz      float64 `json:"doppler_hz"`
	CodePhaseChips float64 `json:"code_phase_chips"`
	// Method says how the values were measured: "tracked" (C/N0 from the
	// tracking loops' prompts) or "acquired" (from the acquisition peak
	// only, when the capture was too short to track).
	Method string `json:"method,omitempty"`
}

// Satellite measurement methods.
const (
	MethodTracked  = "tracked"
	MethodAcquired = "acquired"
)

func ptr[T any](v T) *T { return &v }

// Time is a record timestamp: RFC 3339 in UTC with all nine fractional
// digits, so that records sort and compare as plain strings.
type Time struct{ time.Time }

// TimeLayout is the layout of record timestamps.
const TimeLayout = "2006-01-02T15:04:05.000000000Z"

// MarshalJSON implements json.Marshaler.
func (t Time) MarshalJSON() ([]byte, error) {
	return []byte(`"` + t.UTC().Format(TimeLayout) + `"`), nil
}

// UnmarshalJSON implements json.Unmarshaler (any RFC 3339 form).
func (t *Time) UnmarshalJSON(b []byte) error {
	var v time.Time
	if err := v.UnmarshalJSON(b); err != nil {
		return err
	}
	t.Time = v.UTC()
	return nil
}
