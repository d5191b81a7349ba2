package detect

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"sync"
	"time"
)

// Baseline is what is normal at a site for one input (sample rate, centre,
// format and FFT size): the front end's smooth noise passband (filter
// ripple, tilt and roll-off, the GNSS signals' own bump) at the site's
// thermal noise level, and the satellites' usual C/N0. Narrow lines are not
// part of it: a spur that is always there is reported in every capture
// (as one episode; the configuration may mark it known).
//
// The passband is learned from every capture, outside the time and
// frequency cells its events occupy (floorLearner), fitted smooth
// (Passband): the first Warmup captures are averaged equally, later ones
// with weight W (an exponential average, which follows slow gain and
// temperature drift). So a site whose first capture already has
// interference still learns, and no interference is learned as normal.
type Baseline struct {
	Key      string    `json:"key"`
	FFTSize  int       `json:"fft_size"`
	PSD      []float64 `json:"psd"` // the smooth noise floor per bin, centred order
	Power    float64   `json:"power"`
	Captures int       `json:"captures"`
	// Frames is the effective number of frames averaged into each bin of
	// PSD: how well the floor is known.
	Frames     float64         `json:"frames"`
	Updated    time.Time       `json:"updated"`
	Loaded     bool            `json:"-"`
	CN0        map[int]float64 `json:"cn0_dbhz,omitempty"` // per PRN
	CN0Mean    float64         `json:"cn0_mean_dbhz,omitempty"`
	CN0Samples int             `json:"cn0_captures,omitempty"`
	// The site history the spoofing indicators compare with (see
	// Baselines.LearnSky): the in-band power around L1 of clean captures
	// (dBFS, averaged like the rest over InBandCaptures captures), and
	// which PRNs the site has seen at which sidereal time of day.
	InBandPowerDBFS float64     `json:"in_band_power_dbfs,omitempty"`
	InBandCaptures  int         `json:"in_band_captures,omitempty"`
	Sky             *SkyHistory `json:"sky,omitempty"`
}

// BaselineKey names the input a baseline belongs to.
func BaselineKey(format string, fs, center float64, hasCenter bool, fftSize int) string {
	c := "unknown"
	if hasCenter {
		c = fmt.Sprintf("%.0f", center)
	}
	return fmt.Sprintf("%s/%.0f/%s/%d", format, fs, c, fftSize)
}

// NoisePower is the baseline's noise power in the capture bandwidth, Σ PSD.
func (b *Baseline) NoisePower() float64 {
	var s float64
	for _, v := range b.PSD {
		s += v
	}
	return s
}

// learn folds one clean capture's mean PSD and power into the baseline.
func (b *Baseline) learn(psd []float64, frames int, power float64, when time.Time, warmup int, weight float64) {
	if len(b.PSD) != len(psd) {
		b.PSD = make([]float64, len(psd))
		b.Captures = 0
		b.Frames = 0
	}
	w := weight
	if b.Captures < warmup {
		w = 1 / float64(b.Captures+1)
	}
	for k, v := range psd {
		b.PSD[k] += w * (v - b.PSD[k])
	}
	// Effective number of frames behind each bin: the variance of a
	// weighted mean (1−w)·old + w·new of independent means of E and F
	// exponential frames is (1−w)²/E + w²/F (in units of the squared mean).
	if b.Frames == 0 || w == 1 {
		b.Frames = float64(frames)
	} else {
		b.Frames = 1 / ((1-w)*(1-w)/b.Frames + w*w/float64(frames))
	}
	b.Power += w * (power - b.Power)
	b.Captures++
	if when.After(b.Updated) {
		b.Updated = when
	}
}

// learnCN0 folds per-PRN C/N0 values of a clean capture into the baseline.
func (b *Baseline) learnCN0(cn0 map[int]float64, mean float64, warmup int, weight float64) {
	if b.CN0 == nil {
		b.CN0 = map[int]float64{}
	}
	w := weight
	if b.CN0Samples < warmup {
		w = 1 / float64(b.CN0Samples+1)
	}
	for prn, v := range cn0 {
		if old, ok := b.CN0[prn]; ok {
			b.CN0[prn] = old + w*(v-old)
		} else {
			b.CN0[prn] = v
		}
	}
	b.CN0Mean += w * (mean - b.CN0Mean)
	b.CN0Samples++
}

// Baselines holds the baselines of all inputs; safe for concurrent use.
type Baselines struct {
	mu    sync.Mutex
	items map[string]*Baseline
}

// NewBaselines returns an empty set.
func NewBaselines() *Baselines { return &Baselines{items: map[string]*Baseline{}} }

// get returns the baseline for key, creating an empty one.
func (s *Baselines) get(key string) *Baseline {
	s.mu.Lock()
	defer s.mu.Unlock()
	b, ok := s.items[key]
	if !ok {
		b = &Baseline{Key: key}
		s.items[key] = b
	}
	return b
}

// snapshot returns a copy of the baseline for key (nil PSD if none yet).
func (s *Baselines) snapshot(key string) Baseline {
	s.mu.Lock()
	defer s.mu.Unlock()
	b, ok := s.items[key]
	if !ok {
		return Baseline{Key: key}
	}
	c := *b
	c.PSD = append([]float64(nil), b.PSD...)
	if b.CN0 != nil {
		c.CN0 = make(map[int]float64, len(b.CN0))
		for k, v := range b.CN0 {
			c.CN0[k] = v
		}
	}
	c.Sky = b.Sky.clone()
	return c
}

// update applies fn to the baseline for key under the lock.
func (s *Baselines) update(key string, fn func(*Baseline)) {
	b := s.get(key)
	s.mu.Lock()
	defer s.mu.Unlock()
	fn(b)
}

// Len is the number of inputs with a baseline.
func (s *Baselines) Len() int {
	s.mu.Lock()
	defer s.mu.Unlock()
	return len(s.items)
}

// baselineFile is the persisted form.
type baselineFile struct {
	Version   int         `json:"version"`
	Baselines []*Baseline `json:"baselines"`
}

// WriteTo writes the set as JSON (sorted by key, so that it is stable).
func (s *Baselines) WriteTo(w io.Writer) (int64, error) {
	s.mu.Lock()
	f := baselineFile{Version: 2}
	for _, b := range s.items {
		if len(b.PSD) > 0 {
			f.Baselines = append(f.Baselines, b)
		}
	}
	sort.Slice(f.Baselines, func(i, j int) bool { return f.Baselines[i].Key < f.Baselines[j].Key })
	data, err := json.MarshalIndent(f, "", " ")
	s.mu.Unlock()
	if err != nil {
		return 0, err
	}
	n, err := w.Write(append(data, '\n'))
	return int64(n), err
}

// ReadBaselines reads a set written by WriteTo; the baselines are marked
// loaded.
func ReadBaselines(r io.Reader) (*Baselines, error) {
	var f baselineFile
	dec := json.NewDecoder(io.LimitReader(r, 256<<20))
	if err := dec.Decode(&f); err != nil {
		return nil, fmt.Errorf("baseline file: %w", err)
	}
	if f.Version != 1 && f.Version != 2 {
		return nil, fmt.Errorf("baseline file: version %d, want 1 or 2", f.Version)
	}
	s := NewBaselines()
	for i, b := range f.Baselines {
		if b == nil || b.Key == "" || len(b.PSD) == 0 || len(b.PSD) != b.FFTSize {
			return nil, fmt.Errorf("baseline file: entry %d is incomplete (key, fft_size and psd of that size needed)", i)
		}
		for _, v := range b.PSD {
			if !(v > 0) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("baseline file: entry %s has a non-positive or non-finite PSD value", b.Key)
			}
		}
		if f.Version == 1 {
			// Version 1 kept the mean PSD, spurs included: keep only its
			// smooth passband, so that the spurs are reported again.
			fit, ok := NewPassband(len(b.PSD)).Fit(b.PSD, int(math.Max(b.Frames, 1)), nil)
			if ok {
				b.PSD = append([]float64(nil), fit...)
			}
		}
		b.Loaded = true
		s.items[b.Key] = b
	}
	return s, nil
}
