package detect

import (
	"context"
	"errors"
	"io"
	"math"
	"sort"

	"quietband/ingest"

	"quietband/detect/fft"
	"quietband/detect/gnss"
)

// GNSSMeter measures the GPS L1 C/A satellites of a capture for the
// pipeline: acquisition on the first snapshot (10 ms by default; parallel
// code-phase search, CFAR threshold, see package gnss), then C/N0 tracking
// of the acquired satellites over every block of the capture. Memory is
// one snapshot. A GNSSMeter is used by one pipeline at a time.
type GNSSMeter struct {
	// Acq configures acquisition; zero fields take package gnss defaults,
	// except Pfa, which defaults to 1e-3 per capture (1e-3/32 per PRN
	// search) so that noise alone almost never yields a satellite.
	Acq gnss.AcqConfig

	acq      *gnss.Acquirer
	tr       *gnss.Tracker
	fs, fc   float64
	snap     []complex64
	clean    []complex64
	plan     *fft.Plan
	spec     []complex64
	pow      []float64
	scratch  []float64
	fill     int
	done     bool
	acquired []gnss.Acquired
}

// Start implements SatelliteMeter.
func (m *GNSSMeter) Start(fs, centerHz float64, hasCenter bool) string {
	m.tr, m.fill, m.done, m.acquired = nil, 0, false, m.acquired[:0]
	if !hasCenter {
		return "skipped: the capture's centre frequency is unknown"
	}
	cfg := m.Acq
	if cfg.Pfa == 0 {
		n := len(cfg.PRNs)
		if n == 0 {
			n = 32
		}
		cfg.Pfa = 1e-3 / float64(n)
	}
	if m.acq == nil || m.fs != fs || m.fc != centerHz {
		a, err := gnss.NewAcquirer(cfg, fs, centerHz)
		if err != nil {
			if errors.Is(err, gnss.ErrL1NotInBand) {
				return err.Error()
			}
			return "skipped: " + err.Error()
		}
		m.acq, m.fs, m.fc = a, fs, centerHz
		m.snap = make([]complex64, a.SnapshotLen())
		m.clean = make([]complex64, a.SnapshotLen())
		m.plan = fft.NewPlan(exciseN)
		m.spec = make([]complex64, exciseN)
		m.pow = make([]float64, exciseN)
	}
	return ""
}

// Block implements SatelliteMeter.
func (m *GNSSMeter) Block(start int64, x []complex64) {
	if m.done || m.acq == nil {
		return
	}
	if m.tr != nil {
		m.tr.Process(x, start)
		return
	}
	k := copy(m.snap[m.fill:], x)
	m.fill += k
	if m.fill < len(m.snap) {
		return
	}
	// Acquire on a copy with narrowband interference excised, so that a
	// strong CW, which correlates with every PRN through the C/A code's
	// line spectrum, does not turn into false satellites; track on the
	// samples as they are, so that the C/N0 measured is what an ordinary
	// receiver would see.
	copy(m.clean, m.snap)
	m.excise(m.clean)
	var err error
	m.acquired, err = m.acq.Acquire(m.acquired, m.clean)
	if err != nil || len(m.acquired) == 0 {
		m.done = true
		return
	}
	m.tr, err = gnss.NewTracker(m.fs, m.fc, m.acquired, 0)
	if err != nil {
		m.done = true
		return
	}
	m.tr.Process(m.snap, 0)
	if k < len(x) {
		m.tr.Process(x[k:], start+int64(k))
	}
}

// Result implements SatelliteMeter.
func (m *GNSSMeter) Result() []Satellite {
	if m.tr == nil {
		return nil
	}
	var out []Satellite
	for _, s := range m.tr.Result() {
		out = append(out, Satellite{System: s.System, PRN: s.PRN, CN0DBHz: s.CN0dBHz,
			DopplerHz: s.DopplerHz, CodePhaseChips: s.CodePhaseChips})
	}
	sort.Slice(out, func(i, j int) bool { return out[i].PRN < out[j].PRN })
	return out
}

// StrongestMean is the mean C/N0 (dB-Hz, a mean of the dB values) of the
// n strongest satellites, NaN when there are none: the figure the site's
// C/N0 baseline keeps and reports plot.
func StrongestMean(sats []Satellite, n int) float64 {
	v := make([]float64, 0, len(sats))
	for _, s := range sats {
		v = append(v, s.CN0DBHz)
	}
	sort.Sort(sort.Reverse(sort.Float64Slice(v)))
	if len(v) > n {
		v = v[:n]
	}
	if len(v) == 0 {
		return math.NaN()
	}
	var s float64
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// cn0Drop compares a capture's satellites with the baseline's and returns
// a cn0_drop event (without id, times or links) when the mean C/N0 of the
// satellites common to both fell by at least margin dB, or when at least
// half of the baseline's satellites (and at least two) were lost. The
// drop is measured over the common satellites, PRN by PRN, so that a
// satellite setting or rising does not look like interference.
func cn0Drop(sats []Satellite, base *Baseline, margin float64) (Event, bool) {
	if len(base.CN0) == 0 {
		return Event{}, false
	}
	now := map[int]float64{}
	for _, s := range sats {
		now[s.PRN] = s.CN0DBHz
	}
	var prns, lost []int
	var sumBase, sumNow float64
	// Sorted, so that the sums (and the records) do not depend on map
	// order.
	keys := make([]int, 0, len(base.CN0))
	for prn := range base.CN0 {
		keys = append(keys, prn)
	}
	sort.Ints(keys)
	for _, prn := range keys {
		b := base.CN0[prn]
		if c, ok := now[prn]; ok {
			prns = append(prns, prn)
			sumBase += b
			sumNow += c
		} else {
			lost = append(lost, prn)
		}
	}
	sort.Ints(prns)
	sort.Ints(lost)
	var drop, baseMean, nowMean float64
	if len(prns) > 0 {
		baseMean, nowMean = sumBase/float64(len(prns)), sumNow/float64(len(prns))
		drop = baseMean - nowMean
	} else {
		baseMean = base.CN0Mean
		nowMean = math.NaN()
	}
	lostMany := len(lost) >= 2 && 2*len(lost) >= len(base.CN0)
	if drop < margin && !lostMany {
		return Event{}, false
	}
	if math.IsNaN(nowMean) {
		// Every satellite lost: report the drop to the acquisition floor.
		nowMean = cn0Floor
		drop = baseMean - nowMean
	}
	ev := Event{Class: ClassCN0Drop, Detectors: []string{"cn0"}}
	ev.Params.DropDB = ptr(drop)
	ev.Params.BaselineDBHz = ptr(baseMean)
	ev.Params.CN0DBHz = ptr(nowMean)
	ev.Params.PRNs = append(prns, lost...)
	sort.Ints(ev.Params.PRNs)
	ev.Params.SatellitesLost = lost
	// The wideband J/N that would explain the drop, 10^(drop/10) − 1: a
	// floor rise of R dB costs R dB of C/N0 (REFERENCES §9, §5).
	ev.JNDB = 10 * math.Log10(math.Max(math.Pow(10, drop/10)-1, 1e-6))
	return ev, true
}

// cn0Floor is the C/N0 (dB-Hz) reported for satellites no longer
// acquired: about where a 10 ms non-coherent acquisition stops finding
// them (REFERENCES §4: 34.5 dB-Hz for Pd = 0.5 with K = 10).
const cn0Floor = 34.5

// exciseN is the FFT length of the excision filter.
const exciseN = 4096

// exciseFactor is how far above the median bin power a bin must stand to
// be removed: a bin of noise exceeds 15 times the median with probability
// 2^−15 ≈ 3·10⁻⁵ (exponential bin powers), so the GNSS signals, far below
// the noise, lose nothing measurable.
const exciseFactor = 15

// excise removes narrowband interference from x in place: in blocks of
// exciseN samples, the FFT bins whose power exceeds exciseFactor times the
// block's median are set to zero (frequency-domain excision, a standard
// receiver front-end mitigation). A final partial block is left as it is.
func (m *GNSSMeter) excise(x []complex64) {
	for off := 0; off+exciseN <= len(x); off += exciseN {
		blk := x[off : off+exciseN]
		m.plan.Forward(m.spec, blk)
		for k, v := range m.spec {
			m.pow[k] = float64(real(v)*real(v) + imag(v)*imag(v))
		}
		thr := exciseFactor * medianScratch(&m.scratch, m.pow)
		hit := false
		for k, p := range m.pow {
			if p > thr {
				m.spec[k] = 0
				hit = true
			}
		}
		if !hit {
			continue
		}
		m.plan.Inverse(blk, m.spec)
		for i := range blk {
			blk[i] *= complex(1.0/exciseN, 0)
		}
	}
}

// SatelliteResult is what a SatelliteMeter measured in one capture.
type SatelliteResult struct {
	Satellites []Satellite
	Skipped    string // why nothing was measured, if so
}

// MeasureSatellites reads a capture on its own and measures its
// satellites with m. It depends on nothing but the capture, so replay runs
// it for several captures at once (one meter each) ahead of the spectral
// pass, which must go in time order.
func MeasureSatellites(ctx context.Context, c *ingest.Capture, m SatelliteMeter, blockLen int) (SatelliteResult, error) {
	center, hasCenter := c.CenterHz()
	if why := m.Start(c.SampleRate, center, hasCenter); why != "" {
		return SatelliteResult{Skipped: why}, nil
	}
	r, err := c.NewReader(blockLen)
	if err != nil {
		return SatelliteResult{}, err
	}
	defer r.Close()
	r.SkipHash() // the spectral pass hashes the capture
	for {
		if err := ctx.Err(); err != nil {
			return SatelliteResult{}, err
		}
		b, err := r.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return SatelliteResult{}, err
		}
		m.Block(b.Start, b.Samples)
	}
	return SatelliteResult{Satellites: m.Result()}, nil
}
