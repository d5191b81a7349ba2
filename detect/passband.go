package detect

import (
	"math"

	"gonum.org/v1/gonum/mathext"
)

// Passband estimates a front end's noise passband from one block's mean
// PSD: the smooth curve the thermal noise follows after the front end's
// filters (ripple, tilt, roll-off towards the band edges, the GNSS
// signals' own bump), without the interference standing on it.
//
// Interference is sparse in frequency: lines, bands and sweeps stand above
// a smooth floor, never below it. The fit is therefore a penalized
// B-spline (P-spline, Eilers & Marx 1996, Statistical Science 11(2)) of
// the log PSD with asymmetric weights (asymmetric least squares, Eilers &
// Boelens 2005, "Baseline correction with asymmetric least squares
// smoothing"): a point above the curve counts with weight p, one below it
// with 1 − p, so the curve settles under the interference as under the
// peaks of a spectrum. It minimizes
//
//	Σ_j w_j (y_j − Σ_i B_i(j) c_i)² + λ₂ Σ_i q_i (Δ²c_i)² + λ₁ Σ_i (Δc_i)²
//
// over the coefficients c of K cubic B-splines B_i on uniform knots, with
// y_j = ln of the mean PSD over G adjacent bins (coarse bins: a line
// raises one coarse bin, so it stays an outlier, and the fit costs
// O(N/G)). The second-difference penalty weight q_i is lower over the
// outer fifth of the band on each side, where front ends roll off; the
// small first-difference term keeps the curve from running off where
// interference hides the floor over a wide stretch (a tension spline).
//
// Under noise alone the asymmetric curve sits at the p-expectile of y,
// not its mean; the fit is then repeated with symmetric weights over the
// points within [−5σ_j, +3σ_j] of the expectile curve shifted to the mean,
// σ_j the standard deviation of ln of a mean of M·G exponential powers
// (√ψ₁(n) with n the number of independent powers averaged, ψ₁ the
// trigamma function: the log of a Gamma(n, 1/n) variable), and the
// result is corrected for the log's own bias E[ln X̄] = ψ(n) − ln n
// (ψ the digamma function). So on clean noise the estimate is unbiased,
// and points 3σ above it (interference) never move it.
//
// Adjacent Hann-windowed bins are correlated (the power of two adjacent
// bins of white noise has a correlation coefficient of 1/4 — the squared
// window-overlap coefficient 1/2, common practice), so G bins carry about
// G/1.5 independent powers.
type Passband struct {
	n, g, nc int // fine bins, bins per coarse bin, coarse bins
	nb       int // basis functions (K + 3)

	first []int        // first basis function nonzero at coarse bin j
	basis [][4]float64 // the four nonzero basis values at coarse bin j
	pen1  []float64    // stage 1 penalty matrix, nb×nb
	pen2  []float64    // stage 2 penalty matrix
	y     []float64
	cnt   []float64 // fine bins averaged into coarse bin j
	sig   []float64 // σ_j of y_j
	w     []float64
	fit   []float64 // fitted ln values at the coarse bins
	ata   []float64
	atb   []float64
	coef  []float64
	shape []float64 // fitted linear floor per fine bin

	scratch []float64
}

// Passband fit settings. Each coarse bin's data weight is normalized to
// about 1, so the penalty weights say how much curvature the fit may buy
// with how much residual (in nepers²), whatever the block length.
const (
	passbandSegments = 24
	passbandCoarse   = 256  // at most this many coarse bins
	passbandP        = 0.02 // asymmetric weight of points above the curve
	passbandStiff    = 1e3  // stage 1 curvature penalty, interior
	passbandEdge     = 1.0  // stage 1 curvature penalty, outer fifth
	passbandTension  = 5.0  // stage 1 slope penalty
	passbandLight    = 0.3  // stage 2 curvature penalty, everywhere
	passbandIters    = 15
	// passbandWide is how far above the stage 1 curve a point may stand
	// and still be fitted in stage 2 (4 dB, in nepers): the GNSS signals'
	// bump (up to about 3 dB at the centre under a strong sky) and ripple
	// stay in, interference standing higher is left out.
	passbandWide = 4 * math.Ln10 / 10
	passbandHi   = 3.0 // stage 2: keep points up to +3σ of the curve
	passbandLo   = 5.0 // ... and down to −5σ
)

// NewPassband makes an estimator for n-bin spectra.
func NewPassband(n int) *Passband {
	g := max(1, n/passbandCoarse)
	nc := n / g
	k := min(passbandSegments, max(4, nc/4))
	nb := k + 3
	p := &Passband{n: n, g: g, nc: nc, nb: nb,
		first: make([]int, nc), basis: make([][4]float64, nc),
		pen1: make([]float64, nb*nb), pen2: make([]float64, nb*nb),
		y: make([]float64, nc), cnt: make([]float64, nc), sig: make([]float64, nc), w: make([]float64, nc),
		fit: make([]float64, nc), ata: make([]float64, nb*nb), atb: make([]float64, nb), coef: make([]float64, nb),
		shape: make([]float64, n), scratch: make([]float64, 0, n)}
	for j := 0; j < nc; j++ {
		// Coarse bin centre in knot units: [0, k).
		u := (float64(j) + 0.5) / float64(nc) * float64(k)
		s := min(int(u), k-1)
		t := u - float64(s)
		p.first[j] = s
		p.basis[j] = cubicBSpline(t)
	}
	edge := float64(nb) / 5
	for i := 0; i+2 < nb; i++ {
		mid := float64(i) + 1
		q := passbandStiff
		if mid < edge || mid > float64(nb-1)-edge {
			q = passbandEdge
		}
		addDiffPenalty(p.pen1, nb, i, []float64{1, -2, 1}, q)
		addDiffPenalty(p.pen2, nb, i, []float64{1, -2, 1}, passbandLight)
	}
	for i := 0; i+1 < nb; i++ {
		addDiffPenalty(p.pen1, nb, i, []float64{-1, 1}, passbandTension)
	}
	return p
}

// addDiffPenalty adds q·(d·c[i:])² to the penalty matrix pen (n×n).
func addDiffPenalty(pen []float64, n, i int, d []float64, q float64) {
	for a := range d {
		for b := range d {
			pen[(i+a)*n+i+b] += q * d[a] * d[b]
		}
	}
}

// cubicBSpline returns the four uniform cubic B-spline values at local
// position t ∈ [0, 1) of a segment.
func cubicBSpline(t float64) [4]float64 {
	t2, t3 := t*t, t*t*t
	u := 1 - t
	return [4]float64{u * u * u / 6, (3*t3 - 6*t2 + 4) / 6, (-3*t3 + 3*t2 + 3*t + 1) / 6, t3 / 6}
}

// Fit estimates the passband of psd (mean of m frames per bin, centred
// order), skipping the bins skip marks (the DC bin, masks, bins SK flags
// as non-Gaussian; nil: none). It returns the fitted floor per bin (owned by
// p, valid until the next Fit) and false when too few bins remain to fit
// (then the result is a flat floor at the median of the usable bins, or
// nil if there are none).
func (p *Passband) Fit(psd []float64, m int, skip []bool) ([]float64, bool) {
	nc, g := p.nc, p.g
	used := 0
	for j := 0; j < nc; j++ {
		var s float64
		c := 0
		for k := j * g; k < (j+1)*g; k++ {
			if skip != nil && skip[k] {
				continue
			}
			if v := psd[k]; v > 0 {
				s += v
				c++
			}
		}
		p.cnt[j] = float64(c)
		if c == 0 {
			p.y[j] = 0
			continue
		}
		used++
		p.y[j] = math.Log(s / float64(c))
		p.sig[j] = math.Sqrt(trigamma(independentPowers(m, c)))
	}
	if used < p.nb*2 {
		return p.flat(psd, skip), false
	}
	// Normalized data weights: 1 for a full coarse bin.
	full := math.Sqrt(trigamma(independentPowers(m, g)))
	base := func(j int) float64 {
		if p.cnt[j] == 0 {
			return 0
		}
		r := full / p.sig[j]
		return r * r
	}
	// Stage 1: a stiff asymmetric fit, a line through the interior that
	// may bend at the edges, settles under the interference whatever its
	// width (the clean bins outweigh it at weight 1 − p against p).
	for j := range p.w {
		p.w[j] = base(j)
	}
	p.solve(p.pen1)
	for it := 0; it < passbandIters; it++ {
		changed := false
		for j := range p.w {
			b := base(j)
			w := b * (1 - passbandP)
			if p.y[j] > p.fit[j] {
				w = b * passbandP
			}
			if w != p.w[j] {
				changed = true
			}
			p.w[j] = w
		}
		p.solve(p.pen1)
		if !changed {
			break
		}
	}
	// Stage 2: a light symmetric fit of the points that stand less than
	// passbandWide above the stage 1 curve (shifted from its p-expectile
	// to the mean), then twice of those within [−5σ, +3σ] of the last
	// curve: it follows ripple and the GNSS bump, not interference.
	shift := expectileOffset(passbandP)
	for pass := 0; pass < 3; pass++ {
		for j := range p.w {
			b := base(j)
			if b == 0 {
				p.w[j] = 0
				continue
			}
			r := p.y[j] - p.fit[j]
			keep := r >= -passbandLo*p.sig[j] && r <= passbandHi*p.sig[j]
			if pass == 0 {
				r += shift * p.sig[j]
				keep = r >= -passbandLo*p.sig[j] && r <= math.Max(passbandWide, passbandHi*p.sig[j])
			}
			if keep {
				p.w[j] = b
			} else {
				p.w[j] = 0
			}
		}
		p.solve(p.pen2)
	}
	// Back to the fine bins: linear interpolation of the coarse curve
	// (bias-corrected), exponentiated at the coarse points only.
	bias := mathext.Digamma(independentPowers(m, g)) - math.Log(independentPowers(m, g))
	for j := range p.fit {
		p.fit[j] = math.Exp(p.fit[j] - bias)
	}
	p.interpolate()
	return p.shape, true
}

// independentPowers is how many independent exponential powers a mean
// over m frames of c adjacent Hann bins holds (see Passband).
func independentPowers(m, c int) float64 {
	return math.Max(1, float64(m)*(1+float64(c-1)/1.5))
}

// interpolate fills shape from the coarse curve (already linear).
func (p *Passband) interpolate() {
	g := p.g
	for k := range p.shape {
		// Coarse bin j's centre sits at fine position j·g + (g−1)/2.
		x := (float64(k) - float64(g-1)/2) / float64(g)
		j := int(math.Floor(x))
		switch {
		case j < 0:
			p.shape[k] = p.fit[0]
		case j >= p.nc-1:
			p.shape[k] = p.fit[p.nc-1]
		default:
			t := x - float64(j)
			p.shape[k] = p.fit[j]*(1-t) + p.fit[j+1]*t
		}
	}
}

// flat fills shape with the median of the usable bins (corrected for the
// median of a mean of exponentials) when too few remain for a fit.
func (p *Passband) flat(psd []float64, skip []bool) []float64 {
	vals := p.scratch[:0]
	for k, v := range psd {
		if (skip == nil || !skip[k]) && v > 0 {
			vals = append(vals, v)
		}
	}
	if len(vals) == 0 {
		return nil
	}
	med := selectK(vals, len(vals)/2)
	for k := range p.shape {
		p.shape[k] = med
	}
	return p.shape
}

// solve fits the coefficients with the current weights and evaluates the
// curve at the coarse bins.
func (p *Passband) solve(pen []float64) {
	nb := p.nb
	copy(p.ata, pen)
	clear(p.atb)
	for j := 0; j < p.nc; j++ {
		w := p.w[j]
		if w == 0 {
			continue
		}
		f, b := p.first[j], &p.basis[j]
		wy := w * p.y[j]
		for a := 0; a < 4; a++ {
			wa := w * b[a]
			row := (f + a) * nb
			for c := 0; c < 4; c++ {
				p.ata[row+f+c] += wa * b[c]
			}
			p.atb[f+a] += wy * b[a]
		}
	}
	choleskySolve(p.ata, p.atb, p.coef, nb)
	for j := 0; j < p.nc; j++ {
		f, b := p.first[j], &p.basis[j]
		p.fit[j] = b[0]*p.coef[f] + b[1]*p.coef[f+1] + b[2]*p.coef[f+2] + b[3]*p.coef[f+3]
	}
}

// choleskySolve solves A x = b for a symmetric positive definite n×n A
// (overwritten by its Cholesky factor), in place, without allocating.
func choleskySolve(a, b, x []float64, n int) {
	for j := 0; j < n; j++ {
		d := a[j*n+j]
		for k := 0; k < j; k++ {
			d -= a[j*n+k] * a[j*n+k]
		}
		if d <= 0 {
			d = 1e-12
		}
		d = math.Sqrt(d)
		a[j*n+j] = d
		for i := j + 1; i < n; i++ {
			s := a[i*n+j]
			for k := 0; k < j; k++ {
				s -= a[i*n+k] * a[j*n+k]
			}
			a[i*n+j] = s / d
		}
	}
	// L z = b, then Lᵀ x = z.
	for i := 0; i < n; i++ {
		s := b[i]
		for k := 0; k < i; k++ {
			s -= a[i*n+k] * x[k]
		}
		x[i] = s / a[i*n+i]
	}
	for i := n - 1; i >= 0; i-- {
		s := x[i]
		for k := i + 1; k < n; k++ {
			s -= a[k*n+i] * x[k]
		}
		x[i] = s / a[i*n+i]
	}
}

// expectileOffset is the p-expectile of a standard normal variable (in
// units of its σ): e with p·E[(X−e)⁺] = (1−p)·E[(e−X)⁺], by bisection.
// E[(X−e)⁺] = φ(e) − e·(1 − Φ(e)), E[(e−X)⁺] = e·Φ(e) + φ(e).
func expectileOffset(p float64) float64 {
	lo, hi := -6.0, 6.0
	for range 80 {
		e := (lo + hi) / 2
		phi := math.Exp(-e*e/2) / math.Sqrt(2*math.Pi)
		cdf := 0.5 * math.Erfc(-e/math.Sqrt2)
		above := phi - e*(1-cdf)
		below := e*cdf + phi
		if p*above-(1-p)*below > 0 {
			lo = e
		} else {
			hi = e
		}
	}
	return (lo + hi) / 2
}

// trigamma is ψ₁(x) = d²/dx² ln Γ(x) for x > 0: the recurrence
// ψ₁(x) = ψ₁(x+1) + 1/x² up to x ≥ 6, then the asymptotic series
// 1/x + 1/(2x²) + 1/(6x³) − 1/(30x⁵) + 1/(42x⁷) − 1/(30x⁹)
// (Abramowitz & Stegun 6.4.12, from memory; checked against the exact
// ψ₁(1) = π²/6 in the tests).
func trigamma(x float64) float64 {
	var acc float64
	for x < 6 {
		acc += 1 / (x * x)
		x++
	}
	x2 := 1 / (x * x)
	return acc + 1/x + x2/2 + x2/x*(1.0/6-x2*(1.0/30-x2*(1.0/42-x2/30)))
}
