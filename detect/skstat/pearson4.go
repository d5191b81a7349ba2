package skstat

import (
	"math"
	"sort"

	"gonum.org/v1/gonum/integrate/quad"
)

// pearsonIV holds the parameters of the Pearson type IV density
//
//	f(x) ∝ [1 + ((x−λ)/a)²]^(−m) · exp(−ν·atan((x−λ)/a)),
//
// in the notation of Heinrich (2004).
type pearsonIV struct {
	m, nu, a, lambda float64
}

// fitPearsonIV returns the type IV density with the moments mo (Heinrich
// 2004). ok is false if mo lies outside the type IV region: the criterion
// κ = 2μ2(3μ2² − μ4) + 3μ3² (Nita & Gary 2010b eq. 11) is not negative
// (type I or III), or the discriminant 16(r−1) − β1(r−2)² is not positive
// (type V or VI).
func fitPearsonIV(mo Moments) (p pearsonIV, ok bool) {
	v, m3, m4 := mo.Var, mo.M3, mo.M4
	if !(v > 0) {
		return pearsonIV{}, false
	}
	kappa := 2*v*(3*v*v-m4) + 3*m3*m3
	b1 := m3 * m3 / (v * v * v)
	b2 := m4 / (v * v)
	den := 2*b2 - 3*b1 - 6
	if !(kappa < 0) || !(den > 0) {
		return pearsonIV{}, false
	}
	r := 6 * (b2 - b1 - 1) / den
	disc := 16*(r-1) - b1*(r-2)*(r-2)
	if !(r > 0) || !(disc > 0) || math.IsInf(r, 1) {
		return pearsonIV{}, false
	}
	s := math.Sqrt(disc)
	nu := -r * (r - 2) * math.Sqrt(b1) / s
	if m3 < 0 {
		nu = -nu
	}
	a := math.Sqrt(v) / 4 * s
	return pearsonIV{m: 1 + r/2, nu: nu, a: a, lambda: mo.Mean + a*nu/r}, true
}

const (
	// p4Order is the number of Gauss–Legendre nodes per panel.
	p4Order = 20
	// p4Panels is the number of equal panels across the integration range.
	p4Panels = 96
	// p4Margin is the number of e-folds of the integrand kept beyond the
	// level of the tail probability the table is built for.
	p4Margin = 40
)

// p4Table tabulates the distribution function of a Pearson type IV density
// in θ = atan((x−λ)/a), where f(x) dx ∝ g(θ) dθ with
//
//	g(θ) = cos^(2m−2)(θ) · exp(−νθ),  −π/2 < θ < π/2.
//
// log g is concave (its second derivative is −(2m−2)/cos²θ), so g is
// unimodal with at least Gaussian tails in θ. The table covers the range
// where g is within exp(−depth) of its peak, split into p4Panels panels
// integrated by Gauss–Legendre quadrature; the normalisation is the sum
// over the panels.
type p4Table struct {
	p            pearsonIV
	e            float64 // exponent 2m − 2
	h0           float64 // log g at the mode
	total        float64 // ∫ g over the range
	edge         [p4Panels + 1]float64
	below        [p4Panels + 1]float64 // ∫ g from edge[0] to edge[i]
	above        [p4Panels + 1]float64 // ∫ g from edge[i] to edge[p4Panels]
	node, weight [p4Order]float64      // Gauss–Legendre rule on [−1, 1]
}

// init builds the table for p, accurate for tail probabilities down to
// about pfa.
func (t *p4Table) init(p pearsonIV, pfa float64) {
	t.p = p
	t.e = 2*p.m - 2
	quad.Legendre{}.FixedLocations(t.node[:], t.weight[:], -1, 1)

	// d/dθ log g = −e·tanθ − ν vanishes at the mode.
	mode := math.Atan(-p.nu / t.e)
	t.h0 = 0
	t.h0 = t.logg(mode)
	depth := p4Margin - math.Log(pfa)
	lo := t.depthPoint(mode, -math.Pi/2, depth)
	hi := t.depthPoint(mode, math.Pi/2, depth)

	w := (hi - lo) / p4Panels
	for i := range t.edge {
		t.edge[i] = lo + float64(i)*w
	}
	t.edge[p4Panels] = hi
	// Both cumulative sums are built from the panel masses, so that each
	// tail keeps full relative precision.
	var mass [p4Panels]float64
	for i := range mass {
		mass[i] = t.seg(t.edge[i], t.edge[i+1])
	}
	t.below[0] = 0
	for i, v := range mass {
		t.below[i+1] = t.below[i] + v
	}
	t.above[p4Panels] = 0
	for i := p4Panels - 1; i >= 0; i-- {
		t.above[i] = t.above[i+1] + mass[i]
	}
	t.total = t.below[p4Panels]
}

// logg returns log g(θ) relative to its value at the mode.
func (t *p4Table) logg(th float64) float64 {
	return t.e*math.Log(math.Cos(th)) - t.p.nu*th - t.h0
}

// depthPoint returns the point between mode and end where log g has fallen
// to −depth, or end if it does not fall that far.
func (t *p4Table) depthPoint(mode, end, depth float64) float64 {
	if t.logg(end) >= -depth {
		return end
	}
	in, out := mode, end
	for range 80 {
		mid := (in + out) / 2
		if mid == in || mid == out {
			break
		}
		if t.logg(mid) >= -depth {
			in = mid
		} else {
			out = mid
		}
	}
	return out
}

// seg returns ∫ g(θ) dθ from a to b (relative to the peak value).
func (t *p4Table) seg(a, b float64) float64 {
	c, h := (a+b)/2, (b-a)/2
	var s float64
	for i, x := range t.node {
		s += t.weight[i] * math.Exp(t.logg(c+h*x))
	}
	return s * h
}

// theta maps x to θ = atan((x−λ)/a).
func (t *p4Table) theta(x float64) float64 { return math.Atan((x - t.p.lambda) / t.p.a) }

// x maps θ back to x = λ + a·tanθ.
func (t *p4Table) x(th float64) float64 { return t.p.lambda + t.p.a*math.Tan(th) }

// panel returns the index of the panel holding θ.
func (t *p4Table) panel(th float64) int {
	j := sort.SearchFloat64s(t.edge[:], th) - 1
	return min(max(j, 0), p4Panels-1)
}

// cdf returns P(X ≤ x).
func (t *p4Table) cdf(x float64) float64 {
	th := t.theta(x)
	switch {
	case th <= t.edge[0]:
		return 0
	case th >= t.edge[p4Panels]:
		return 1
	}
	j := t.panel(th)
	return (t.below[j] + t.seg(t.edge[j], th)) / t.total
}

// sf returns P(X > x).
func (t *p4Table) sf(x float64) float64 {
	th := t.theta(x)
	switch {
	case th <= t.edge[0]:
		return 1
	case th >= t.edge[p4Panels]:
		return 0
	}
	j := t.panel(th)
	return (t.above[j+1] + t.seg(th, t.edge[j+1])) / t.total
}

// lowerQuantile returns x with P(X ≤ x) = p.
func (t *p4Table) lowerQuantile(p float64) float64 {
	target := p * t.total
	j := sort.SearchFloat64s(t.below[:], target) - 1
	j = min(max(j, 0), p4Panels-1)
	a, base := t.edge[j], t.below[j]
	th := rootIncreasing(func(th float64) (float64, float64) {
		return base + t.seg(a, th) - target, math.Exp(t.logg(th))
	}, a, t.edge[j+1])
	return t.x(th)
}

// upperQuantile returns x with P(X > x) = p.
func (t *p4Table) upperQuantile(p float64) float64 {
	target := p * t.total
	// above is decreasing; find the panel j with above[j+1] ≤ target < above[j].
	j := sort.Search(p4Panels+1, func(i int) bool { return t.above[i] <= target }) - 1
	j = min(max(j, 0), p4Panels-1)
	b, base := t.edge[j+1], t.above[j+1]
	// target − (tail above θ) increases with θ.
	th := rootIncreasing(func(th float64) (float64, float64) {
		return target - base - t.seg(th, b), math.Exp(t.logg(th))
	}, t.edge[j], b)
	return t.x(th)
}

// rootIncreasing solves f(θ) = 0 on [lo, hi] for f increasing with f(lo) ≤ 0 ≤ f(hi);
// f returns its value and derivative. Newton steps are safeguarded by
// bisection.
func rootIncreasing(f func(float64) (float64, float64), lo, hi float64) float64 {
	tol := 1e-14 * (hi - lo)
	th := (lo + hi) / 2
	for range 100 {
		v, dv := f(th)
		if v == 0 {
			return th
		}
		if v > 0 {
			hi = th
		} else {
			lo = th
		}
		next := th - v/dv
		if !(next > lo && next < hi) {
			next = (lo + hi) / 2
		}
		if math.Abs(next-th) <= tol || hi-lo <= tol {
			return next
		}
		th = next
	}
	return th
}
