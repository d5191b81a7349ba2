package detect

import (
	"fmt"
	"math"
	"math/bits"
	"slices"
	"sort"
	"strconv"
	"time"

	"quietband/detect/gnss"
)

// Spoofing and meaconing: the satellites of a capture that are not what
// they seem (REFERENCES §11). The indicators, each computed from what the
// satellite meter measured (SatelliteResult), the site's history
// (Baseline) and the capture's power (PowerStats), and each named with
// its value in the event:
//
//   - two_peaks: PRNs with a second correlation peak beyond ±2 chips of
//     the first, or an earlier, weaker one 0.9–3 chips before it
//     (gnss.Acquirer.Correlations; auxiliary peaks, REFERENCES §11.3).
//     Value: how many PRNs.
//   - common_delay_chips: at least three PRNs whose second peak is the
//     earlier, weaker one at the same Doppler (within one 500 Hz bin)
//     with delays within 0.5 chip of each other: the band re-radiated by
//     a meacon (REFERENCES §11.5, its proposed rule; multipath is later
//     and weaker and its delays differ per PRN). Value: the delay.
//   - cn0_high_even_db: the tracked satellites' C/N0 at least 3 dB above
//     the site's per-PRN baseline on average and within 1.5 dB of each
//     other (standard deviation) over at least four PRNs (REFERENCES
//     §11.1: a single-antenna spoofer gives every PRN nearly the same
//     C/N0, an open sky spans 35–50 dB-Hz). Value: the rise.
//   - power_up_cn0_up_db: the in-band power around L1 up with the C/N0
//     up (ClassifyPowerCN0; REFERENCES §11.2, Akos 2012). Value: the
//     power rise.
//   - code_carrier_chips_s: at least two tracked PRNs whose code Doppler
//     departs from carrier Doppler/1540 by more than 0.3 chips/s and four
//     standard errors, after the common part (a recorder whose sample
//     clock and LO do not share a reference) is removed (REFERENCES
//     §11.4). Value: the largest departure.
//   - unexpected_prns: strong PRNs (40 dB-Hz and more) seen at a sidereal
//     time of day at which the site, observing then, never saw them (the
//     GPS sky repeats every sidereal day, 23 h 56 min 4 s: common
//     practice; SkyHistory). Value: how many.
//
// An event is raised for meaconing when common_delay_chips fired; for
// counterfeit signals when two_peaks reached three PRNs (a receiver
// needs four satellites for a fix, so a spoofer sends at least four:
// common practice), or when two of the other four indicators fired
// together (none of them alone is proof: a new antenna raises C/N0, a
// constellation change brings a new PRN).

// Spoofing thresholds (sources above).
const (
	minPairPRNs      = 3   // PRNs with two peaks for an event
	commonDelaySpan  = 0.5 // chips: delays within this of each other (REFERENCES §11.5)
	commonDopplerHz  = 500 // one Doppler bin of the search (REFERENCES §11.5)
	meaconMinChips   = 0.9 // the early-path range of the search
	meaconMaxChips   = 10  // a meacon's processing and path delay, about 10 µs at most: common practice
	cn0HighDB        = 3   // C/N0 rise over the per-PRN baseline ("several dB")
	cn0EvenDB        = 1.5 // largest standard deviation across PRNs of an even C/N0
	cn0EvenMinPRNs   = 4   // PRNs for the C/N0 indicators
	codeCarrierChips = 0.3 // chips/s: ≈ 460 Hz of carrier Doppler (REFERENCES §11.4)
	codeCarrierSigma = 4   // standard errors
	skyStrongDBHz    = 40  // a PRN this strong is not a flickering low one
	defaultSignalBW  = 2.046e6
)

// PowerStats is what the capture's power says, for the power-versus-C/N0
// indicator: build it with NewPowerStats.
type PowerStats struct {
	// InBandDBFS is the power within ±1.023 MHz of L1
	// (SatelliteResult.InBandPowerDBFS), nil when not measured.
	InBandDBFS *float64
	// AGCDeviationDB is the whole capture's power over the site
	// baseline's (Stats.AGCDeviationDB), nil while the baseline is being
	// learned.
	AGCDeviationDB *float64
	// LowBit: the samples take a low-bit quantizer's few levels, whose
	// power says little about the input's (REFERENCES §12.3); the power
	// indicators are then not used.
	LowBit bool
	// SampleRateHz is the analysed complex rate: the capture bandwidth
	// of a spoofing event's J/N.
	SampleRateHz float64
}

// NewPowerStats gathers a capture's power statistics from its Stats (nil:
// none) and its satellites' measurement, at analysed rate fs.
func NewPowerStats(st *Stats, r SatelliteResult, fs float64) PowerStats {
	p := PowerStats{InBandDBFS: r.InBandPowerDBFS, SampleRateHz: fs}
	if st != nil {
		if st.Baseline != "learning" {
			p.AGCDeviationDB = ptr(st.AGCDeviationDB)
		}
		p.LowBit = st.Quantization != ""
	}
	return p
}

// Power-versus-C/N0 classes (REFERENCES §11.2's matrix).
const (
	// PowerCN0Spoofer: in-band power up and C/N0 up.
	PowerCN0Spoofer = "spoofer"
	// PowerCN0Jammer: in-band power up and C/N0 down.
	PowerCN0Jammer = "jammer"
	// PowerCN0GainChange: in-band power up and C/N0 unchanged: the front
	// end's gain changed, nothing in the sky.
	PowerCN0GainChange = "gain_change"
	// PowerCN0Obstruction: in-band power flat and C/N0 down: a blocked
	// sky.
	PowerCN0Obstruction = "obstruction"
)

// PowerCN0 is the power-versus-C/N0 reading of a capture.
type PowerCN0 struct {
	// Class is one of the PowerCN0 classes, or "" when the pair fits none
	// (both flat, power down, or the two too close to tell).
	Class string
	// PowerRiseDB is the in-band power over the site's; CN0ChangeDB the
	// mean change of the common satellites' C/N0 against their baseline
	// (those at 36 dB-Hz and more when there are any, as cn0DropFrom),
	// over PRNs satellites.
	PowerRiseDB, CN0ChangeDB float64
	PRNs                     int
}

// Power-versus-C/N0 thresholds.
const (
	// powerRiseDB: in-band power "up" from 0.5 dB: a matched-power
	// spoofer 3 dB over eight 45 dB-Hz signals raises a 2 MHz band by
	// 0.79 dB (REFERENCES §11.1 table), the 10 ms snapshot's power is
	// known to 0.03 dB (TestInBandPower).
	powerRiseDB = 0.5
	// cn0MoveDB: C/N0 "up" or "down" from 1 dB: each tracked satellite's
	// 0.25 s C/N0 scatters by 0.45–0.85 dB (package gnss), the mean of
	// three or more by half that; a wideband jammer that raises the power
	// by R dB lowers C/N0 by R dB (REFERENCES §9), a gain change by 0.
	cn0MoveDB = 1
	// gainChangeMinDB: the smallest rise told as a gain change: the two
	// hypotheses (C/N0 −R and 0) are then at least 0.5 dB apart either
	// side of the −R/2 boundary.
	gainChangeMinDB = 1
	// minCommonPRNs: satellites common with the baseline for a C/N0
	// change.
	minCommonPRNs = 3
)

// ClassifyPowerCN0 reads a capture's in-band power against the site's
// and its satellites' C/N0 against their baseline (REFERENCES §11.2):
//
//   - power up (≥ 0.5 dB), C/N0 up (≥ +1 dB): a spoofer;
//   - power up, C/N0 down by more than half the rise (and 1 dB or more
//     for rises below 2 dB): a jammer (wideband noise lowers C/N0 by the
//     rise, REFERENCES §9);
//   - power up by 1 dB or more, C/N0 within half the rise of unchanged: a
//     gain change of the front end, not interference;
//   - power flat (within ±0.5 dB), C/N0 down by 1 dB or more: an
//     obstruction (the sky blocked: removing every signal lowers the
//     power by 0.5–0.7 dB at most, REFERENCES §11.2).
//
// ok is false when it cannot tell: no in-band power of the capture or of
// the site, low-bit samples, satellites not measured or only acquired,
// or fewer than three satellites in common with the baseline.
//
// The pipeline can use it to veto a wideband_noise event: with Class
// PowerCN0GainChange, the band's power rose while the satellites kept
// their C/N0, so the rise is the recorder's gain (or a temperature
// drift), not noise in the sky; that veto needs the satellites measured
// and the site's baselines learned, and says nothing when ok is false.
func ClassifyPowerCN0(r SatelliteResult, base *Baseline, power PowerStats) (PowerCN0, bool) {
	var out PowerCN0
	if power.InBandDBFS == nil || power.LowBit || base == nil || base.InBandCaptures == 0 || len(base.CN0) == 0 ||
		r.Skipped != "" || r.Unmeasured != "" {
		return out, false
	}
	var sum, rel float64
	n, nRel := 0, 0
	for _, s := range r.Satellites {
		if s.Method == MethodAcquired {
			return out, false
		}
		b, ok := base.CN0[s.PRN]
		if !ok {
			continue
		}
		sum += s.CN0DBHz - b
		n++
		if s.CN0DBHz >= reliableDBHz {
			rel += s.CN0DBHz - b
			nRel++
		}
	}
	// Satellites of the baseline lost now count as a fall to the
	// acquisition floor (as in cn0DropFrom).
	lost := 0
	for prn := range base.CN0 {
		if !slices.ContainsFunc(r.Satellites, func(s Satellite) bool { return s.PRN == prn }) {
			lost++
		}
	}
	switch {
	case nRel >= minCommonPRNs:
		out.CN0ChangeDB, out.PRNs = rel/float64(nRel), nRel
	case n >= minCommonPRNs:
		out.CN0ChangeDB, out.PRNs = sum/float64(n), n
	case lost >= minCommonPRNs && 2*lost >= len(base.CN0):
		out.CN0ChangeDB, out.PRNs = cn0Floor-base.CN0Mean, lost
	default:
		return out, false
	}
	out.PowerRiseDB = *power.InBandDBFS - base.InBandPowerDBFS
	rise, dc := out.PowerRiseDB, out.CN0ChangeDB
	switch {
	case rise >= powerRiseDB && dc >= cn0MoveDB:
		out.Class = PowerCN0Spoofer
	case rise >= powerRiseDB && dc <= -rise/2 && dc <= -min(cn0MoveDB, rise/2):
		out.Class = PowerCN0Jammer
	case rise >= gainChangeMinDB && dc > -rise/2 && dc < cn0MoveDB:
		out.Class = PowerCN0GainChange
	case math.Abs(rise) < powerRiseDB && dc <= -cn0MoveDB:
		out.Class = PowerCN0Obstruction
	}
	return out, true
}

// GainChange reports whether a capture's power rise is the front end's
// gain rather than interference: ClassifyPowerCN0 gives
// PowerCN0GainChange. The pipeline may drop a wideband_noise event then.
func GainChange(r SatelliteResult, base *Baseline, power PowerStats) bool {
	c, ok := ClassifyPowerCN0(r, base, power)
	return ok && c.Class == PowerCN0GainChange
}

// Spoofing decides from one capture's satellites (r), the site's history
// (base, the baseline as it was before this capture; nil: none) and the
// capture's power whether its satellites are spoofed, and returns a
// spoofing event (without id, capture, times, power or links: the
// pipeline sets those, as for cn0_drop) with the kind, the PRNs, every
// indicator that fired, the false signals' power over the authentic ones
// and, for a meacon, its delay. when is the capture's start (zero:
// unknown, and the sidereal-time indicator is not used). The pipeline
// calls it after the satellites are measured, for every capture whose
// satellites were; see the package's spoofing notes above for the
// indicators and the rule.
func Spoofing(r SatelliteResult, base *Baseline, power PowerStats, when time.Time, cfg Config) (Event, bool) {
	if r.Skipped != "" || len(r.Satellites) == 0 && len(r.Correlations) == 0 {
		return Event{}, false
	}
	ind := map[string]float64{}
	pairs := r.Correlations
	if len(pairs) > 0 {
		ind["two_peaks"] = float64(len(pairs))
	}
	// Meaconing: the earlier, weaker peak at the same Doppler, at one
	// delay on several PRNs.
	var cands []gnss.Correlation
	for _, c := range pairs {
		d := -c.DelayChips
		if d >= meaconMinChips && d <= meaconMaxChips && math.Abs(c.Second.DopplerHz-c.First.DopplerHz) <= commonDopplerHz {
			cands = append(cands, c)
		}
	}
	cluster := delayCluster(cands)
	meacon := len(cluster) >= minPairPRNs
	if meacon {
		d := make([]float64, len(cluster))
		for i, c := range cluster {
			d[i] = -c.DelayChips
		}
		ind["common_delay_chips"] = round3(median(d))
	}
	twoPeaks := len(pairs) >= minPairPRNs
	if !twoPeaks {
		delete(ind, "two_peaks")
	}

	// The peak-free indicators.
	others := 0
	var rise, spread float64
	var evenPRNs []int
	if rise, spread, evenPRNs = cn0HighEven(r, base); evenPRNs != nil {
		ind["cn0_high_even_db"] = round3(rise)
		ind["cn0_spread_db"] = round3(spread)
		others++
	}
	if pc, ok := ClassifyPowerCN0(r, base, power); ok && pc.Class == PowerCN0Spoofer {
		ind["power_up_cn0_up_db"] = round3(pc.PowerRiseDB)
		others++
	}
	if v, n := codeCarrier(r.CodeRates); n >= 2 {
		ind["code_carrier_chips_s"] = round3(v)
		others++
	}
	var unexpected []int
	if base != nil && !when.IsZero() {
		unexpected = base.Sky.unexpected(r.Satellites, when)
		if len(unexpected) > 0 {
			ind["unexpected_prns"] = float64(len(unexpected))
			others++
		}
	}
	if !meacon && !twoPeaks && others < 2 {
		return Event{}, false
	}

	ev := Event{Class: ClassSpoofing, BandwidthHz: cfg.ReceiverBandwidthHz}
	if ev.BandwidthHz == 0 {
		ev.BandwidthHz = defaultSignalBW
	}
	p := &ev.Params
	p.Indicators = ind
	var used []gnss.Correlation
	switch {
	case meacon:
		p.Kind = "meaconing"
		used = cluster
		p.DelayChips = ptr(ind["common_delay_chips"])
	default:
		p.Kind = "counterfeit"
		used = pairs
	}
	var over float64
	var haveOver bool
	if len(used) > 0 && (meacon || twoPeaks) {
		over, haveOver = powerOver(used, r, base)
		for _, c := range used {
			p.PRNs = append(p.PRNs, c.PRN)
		}
	} else {
		// No second peaks: the spoofed signals are the tracked ones, their
		// rise over the site's baseline the power over the authentic.
		if evenPRNs != nil {
			over, haveOver = rise, true
		}
		for _, s := range r.Satellites {
			p.PRNs = append(p.PRNs, s.PRN)
		}
		p.PRNs = append(p.PRNs, unexpected...)
	}
	sort.Ints(p.PRNs)
	p.PRNs = slices.Compact(p.PRNs)
	if haveOver {
		p.PowerOverAuthenticDB = ptr(round3(over))
	}
	for _, c := range used {
		p.Peaks = append(p.Peaks, peakPair(c))
	}
	// J/N: a meacon re-radiates the noise at g times its power; a
	// counterfeit adds its signals, C/N0·N0 each, to a band of fs·N0.
	switch {
	case meacon && haveOver:
		ev.JNDB = over
	case power.SampleRateHz > 0:
		var sum float64
		for _, prn := range p.PRNs {
			if cn0, ok := spoofedCN0(r, prn); ok {
				sum += math.Pow(10, cn0/10)
			}
		}
		if sum > 0 {
			ev.JNDB = 10 * math.Log10(sum/power.SampleRateHz)
		}
	}
	for k := range ind {
		ev.Detectors = append(ev.Detectors, k)
	}
	sort.Strings(ev.Detectors)
	return ev, true
}

// delayCluster returns the largest set of meacon candidates whose delays
// lie within commonDelaySpan of each other (the first found among equal
// sizes, in delay order), sorted by PRN.
func delayCluster(c []gnss.Correlation) []gnss.Correlation {
	s := slices.Clone(c)
	slices.SortFunc(s, func(a, b gnss.Correlation) int {
		switch {
		case a.DelayChips > b.DelayChips:
			return -1
		case a.DelayChips < b.DelayChips:
			return 1
		}
		return a.PRN - b.PRN
	})
	var best []gnss.Correlation
	for i := range s {
		j := i
		for j < len(s) && -s[j].DelayChips-(-s[i].DelayChips) <= commonDelaySpan+1e-9 {
			j++
		}
		if j-i > len(best) {
			best = s[i:j]
		}
	}
	out := slices.Clone(best)
	slices.SortFunc(out, func(a, b gnss.Correlation) int { return a.PRN - b.PRN })
	return out
}

// powerOver estimates the false signals' power over the authentic ones,
// in dB, from PRNs with two peaks: the mean over the PRNs of the spoofed
// peak's power over the authentic one's. A copy at the first peak's
// Doppler (within one bin: matched-power, meaconing) is the stronger
// peak. Of a counterfeit pair elsewhere in Doppler, either peak may be
// the false one: a spoofer sends its signals alike (REFERENCES §11.1), so
// the false peaks sit near one level L, and the authentic ones near the
// site's per-PRN baseline lowered by a common δ (the false signals'
// cross-correlation is noise to every authentic one: eight at 50 dB-Hz
// cost about 1.8 dB, REFERENCES §11.1, more at higher levels). Each
// PRN takes the assignment with the smaller squared distance to L and to
// baseline + δ (to L alone without a baseline for it), L and δ the
// medians of the current assignment, twice over, starting from "the peak
// nearer the median of the first peaks is false". A peak's C/N0 is the
// tracked one for the first, that plus SecondDB for the second. Each
// PRN's ratio of two λ̂ from ten 1 ms blocks scatters by 0.5–2 dB
// (K(1 + λ) ± √(K(1 + 2λ)), REFERENCES §4), the mean over the PRNs by a
// third of that or less.
func powerOver(c []gnss.Correlation, r SatelliteResult, base *Baseline) (float64, bool) {
	if len(c) == 0 {
		return 0, false
	}
	type pk struct {
		c1, c2, b   float64 // dB: first, second, baseline
		hasB, cross bool    // a baseline; a counterfeit pair (other Doppler)
		secondFalse bool
	}
	ps := make([]pk, len(c))
	var firsts []float64
	for i, x := range c {
		c1, ok := spoofedCN0(r, x.PRN)
		if !ok { // an acquired-only PRN of a short capture: λ̂ in dB
			c1 = 10 * math.Log10(x.First.SNR)
		}
		b, hasB := baseCN0(base, x.PRN)
		ps[i] = pk{c1: c1, c2: c1 + x.SecondDB, b: b, hasB: hasB && ok,
			cross: math.Abs(x.Second.DopplerHz-x.First.DopplerHz) > commonDopplerHz}
		firsts = append(firsts, c1)
	}
	level := median(firsts)
	for i := range ps {
		ps[i].secondFalse = math.Abs(ps[i].c2-level) < math.Abs(ps[i].c1-level)
	}
	for range 2 {
		var lv, dl []float64
		for _, p := range ps {
			f, a := p.c1, p.c2
			if p.secondFalse {
				f, a = a, f
			}
			lv = append(lv, f)
			if p.hasB {
				dl = append(dl, a-p.b)
			}
		}
		level = median(lv)
		delta := 0.0
		if len(dl) > 0 {
			delta = median(dl)
		}
		for i, p := range ps {
			costFirst := (p.c1 - level) * (p.c1 - level) // the first false
			costSecond := (p.c2 - level) * (p.c2 - level)
			if p.hasB {
				costFirst += (p.c2 - p.b - delta) * (p.c2 - p.b - delta)
				costSecond += (p.c1 - p.b - delta) * (p.c1 - p.b - delta)
			}
			ps[i].secondFalse = costSecond < costFirst
		}
	}
	var sum float64
	for i, x := range c {
		d := -x.SecondDB // first over second
		if ps[i].cross && ps[i].secondFalse {
			d = -d
		}
		sum += d
	}
	return sum / float64(len(c)), true
}

// baseCN0 is the site's baseline C/N0 of a PRN.
func baseCN0(base *Baseline, prn int) (float64, bool) {
	if base == nil {
		return 0, false
	}
	v, ok := base.CN0[prn]
	return v, ok
}

// spoofedCN0 returns the tracked C/N0 (dB-Hz) of a PRN: that of its
// strongest peak, which the tracker follows.
func spoofedCN0(r SatelliteResult, prn int) (float64, bool) {
	i := slices.IndexFunc(r.Satellites, func(s Satellite) bool { return s.PRN == prn })
	if i < 0 {
		return 0, false
	}
	return r.Satellites[i].CN0DBHz, true
}

// cn0HighEven evaluates the cn0_high_even indicator: the mean rise of the
// tracked satellites' C/N0 over their per-PRN baseline and the standard
// deviation of their C/N0 across PRNs; prns is nil unless it fired.
func cn0HighEven(r SatelliteResult, base *Baseline) (rise, spread float64, prns []int) {
	if base == nil || len(base.CN0) == 0 || r.Unmeasured != "" {
		return 0, 0, nil
	}
	var now []float64
	var sum float64
	var ps []int
	for _, s := range r.Satellites {
		b, ok := base.CN0[s.PRN]
		if !ok || s.Method != MethodTracked {
			continue
		}
		now = append(now, s.CN0DBHz)
		sum += s.CN0DBHz - b
		ps = append(ps, s.PRN)
	}
	if len(now) < cn0EvenMinPRNs {
		return 0, 0, nil
	}
	rise = sum / float64(len(now))
	spread = stddev(now)
	if rise < cn0HighDB || spread > cn0EvenDB {
		return rise, spread, nil
	}
	return rise, spread, ps
}

// codeCarrier evaluates the code_carrier indicator over the tracked
// satellites' code-rate mismatches: the mismatch of each relative to
// their median (the common part is the recorder's clocks, not the sky)
// beyond codeCarrierChips chips/s and codeCarrierSigma standard errors.
// It returns the largest departure and how many PRNs depart.
func codeCarrier(rates []gnss.CodeRate) (float64, int) {
	if len(rates) < 3 {
		return 0, 0
	}
	e := make([]float64, len(rates))
	for i, c := range rates {
		e[i] = c.ErrChipsS
	}
	m := median(e)
	var worst float64
	n := 0
	for _, c := range rates {
		d := math.Abs(c.ErrChipsS - m)
		if d > codeCarrierChips && d > codeCarrierSigma*c.SigmaChipsS {
			n++
			worst = max(worst, d)
		}
	}
	return worst, n
}

// peakPair turns a PRN's two peaks into the event's form.
func peakPair(c gnss.Correlation) PeakPair {
	info := func(p gnss.Peak) PeakInfo {
		return PeakInfo{CodePhaseChips: round3(p.CodePhaseChips), DopplerHz: math.Round(p.DopplerHz*10) / 10,
			SNRDB: math.Round(100*10*math.Log10(math.Max(p.SNR, 1e-3))) / 100}
	}
	pp := PeakPair{PRN: c.PRN, First: info(c.First), Second: info(*c.Second), DelayChips: round3(c.DelayChips),
		SecondDB: math.Round(c.SecondDB*100) / 100}
	for _, s := range c.Profile {
		pp.Profile = append(pp.Profile, ProfileSegment{DopplerHz: math.Round(s.DopplerHz*10) / 10,
			StartChips: round3(s.StartChips), StepChips: math.Round(s.StepChips*1e5) / 1e5, PowerDB: s.PowerDB})
	}
	return pp
}

func round3(v float64) float64 { return math.Round(v*1000) / 1000 }

func median(v []float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := slices.Clone(v)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

func stddev(v []float64) float64 {
	var m float64
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	var s float64
	for _, x := range v {
		s += (x - m) * (x - m)
	}
	return math.Sqrt(s / float64(max(len(v)-1, 1)))
}

// SiderealDay is the Earth's rotation period against the stars, in
// seconds: the GPS constellation's ground tracks repeat after it (two
// orbits of 11 h 58 min; common practice).
const SiderealDay = 86164.0905

// skyBins divides the sidereal day into 15-minute bins for the sky
// history: a satellite rising or setting moves across the sky by a few
// degrees in that time.
const skyBins = 96

// skyMinCaptures: a bin (with its neighbours) tells which PRNs to expect
// once the site has learned this many clean captures in it.
const skyMinCaptures = 3

// SkyHistory is which PRNs a site has seen at which sidereal time of day:
// the sidereal day in Bins bins (15 minutes each), Captures the number of
// clean captures learned per bin, Seen per PRN the bins it was measured
// in (a bit set, as hexadecimal, bin 0 in the lowest bit of the last
// digit).
type SkyHistory struct {
	Bins     int            `json:"bins"`
	Captures []int          `json:"captures"`
	Seen     map[int]string `json:"seen"`
}

// siderealBin is the bin of the sidereal day that t falls in (counted
// from the Unix epoch: any fixed origin serves, since only the repeat
// matters).
func siderealBin(t time.Time, bins int) int {
	s := float64(t.Unix()) + float64(t.Nanosecond())*1e-9
	ph := math.Mod(s, SiderealDay) / SiderealDay
	if ph < 0 {
		ph++
	}
	return min(int(ph*float64(bins)), bins-1)
}

// seenBits decodes a PRN's bins.
func (h *SkyHistory) seenBits(prn int) []uint64 {
	w := make([]uint64, (h.Bins+63)/64)
	s := h.Seen[prn]
	// Hexadecimal, most significant first: 16 digits per word from the end.
	for i := range w {
		hi := len(s) - 16*i
		if hi <= 0 {
			break
		}
		lo := max(0, hi-16)
		v, err := strconv.ParseUint(s[lo:hi], 16, 64)
		if err == nil {
			w[i] = v
		}
	}
	return w
}

func (h *SkyHistory) setSeen(prn int, w []uint64) {
	s := ""
	for i := len(w) - 1; i >= 0; i-- {
		s += fmt.Sprintf("%016x", w[i])
	}
	h.Seen[prn] = s
}

func (h *SkyHistory) clone() *SkyHistory {
	if h == nil {
		return nil
	}
	c := &SkyHistory{Bins: h.Bins, Captures: slices.Clone(h.Captures), Seen: make(map[int]string, len(h.Seen))}
	for k, v := range h.Seen {
		c.Seen[k] = v
	}
	return c
}

// learn records the measured satellites of a clean capture at t.
func (h *SkyHistory) learn(sats []Satellite, t time.Time) {
	if h.Bins != skyBins || len(h.Captures) != h.Bins {
		h.Bins, h.Captures, h.Seen = skyBins, make([]int, skyBins), map[int]string{}
	}
	if h.Seen == nil {
		h.Seen = map[int]string{}
	}
	b := siderealBin(t, h.Bins)
	h.Captures[b]++
	for _, s := range sats {
		if s.Method == MethodAcquired {
			continue
		}
		w := h.seenBits(s.PRN)
		w[b/64] |= 1 << (b % 64)
		h.setSeen(s.PRN, w)
	}
}

// unexpected returns the strong tracked PRNs of sats that the site never
// saw within one bin of t's sidereal time although it learned at least
// skyMinCaptures captures there.
func (h *SkyHistory) unexpected(sats []Satellite, t time.Time) []int {
	if h == nil || h.Bins == 0 || len(h.Captures) != h.Bins {
		return nil
	}
	b := siderealBin(t, h.Bins)
	var nb []int
	covered := 0
	for d := -1; d <= 1; d++ {
		k := (b + d + h.Bins) % h.Bins
		nb = append(nb, k)
		covered += h.Captures[k]
	}
	if covered < skyMinCaptures {
		return nil
	}
	var out []int
	for _, s := range sats {
		if s.Method != MethodTracked || s.CN0DBHz < skyStrongDBHz {
			continue
		}
		w := h.seenBits(s.PRN)
		seen := false
		for _, k := range nb {
			seen = seen || w[k/64]&(1<<(k%64)) != 0
		}
		if !seen {
			out = append(out, s.PRN)
		}
	}
	return out
}

// SeenCount is how many PRNs the history holds (for tests and reports).
func (h *SkyHistory) SeenCount() int {
	if h == nil {
		return 0
	}
	n := 0
	for prn := range h.Seen {
		for _, w := range h.seenBits(prn) {
			if bits.OnesCount64(w) > 0 {
				n++
				break
			}
		}
	}
	return n
}

// LearnSky folds a clean capture into the site history the spoofing
// indicators compare with, for the input of baseline key: the in-band
// power around L1 (averaged as the rest of the baseline: equally over
// cfg's warm-up captures, then with its weight), and, when the capture's
// start is known, which PRNs were measured at its sidereal time of day.
// The pipeline calls it for captures whose satellites were measured
// (tracked) and that raised no event that makes them unusual (the
// captures that teach the C/N0 baseline, and no spoofing event);
// LearnSky itself skips what was not measured.
func (s *Baselines) LearnSky(key string, r SatelliteResult, power PowerStats, when time.Time, cfg Config) {
	if r.Skipped != "" || r.Unmeasured != "" || len(r.Satellites) == 0 {
		return
	}
	for _, sat := range r.Satellites {
		if sat.Method == MethodAcquired {
			return
		}
	}
	warm, weight := cfg.BaselineWarmup, cfg.BaselineWeight
	if warm == 0 {
		warm = 4
	}
	if weight == 0 {
		weight = 0.1
	}
	s.update(key, func(b *Baseline) {
		if power.InBandDBFS != nil && !power.LowBit {
			w := weight
			if b.InBandCaptures < warm {
				w = 1 / float64(b.InBandCaptures+1)
			}
			b.InBandPowerDBFS += w * (*power.InBandDBFS - b.InBandPowerDBFS)
			b.InBandCaptures++
		}
		if !when.IsZero() {
			if b.Sky == nil {
				b.Sky = &SkyHistory{}
			}
			b.Sky.learn(r.Satellites, when)
		}
	})
}
