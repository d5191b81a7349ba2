package skstat

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
)

// DefaultPFA is the customary false-alarm probability per side,
// 0.0013499, the one-sided tail of a normal distribution beyond 3σ, as
// used with the SK estimator by Nita & Gary (2010b).
const DefaultPFA = 0.0013499

// Threshold methods reported in Thresholds.Method.
const (
	// MethodPearsonIV marks thresholds from the Pearson type IV fit
	// to the null moments (Heinrich 2004).
	MethodPearsonIV = "pearson-iv"
	// MethodPearsonIII marks thresholds from the Pearson type III
	// approximation (Nita & Gary 2010b eq. 19–21).
	MethodPearsonIII = "pearson-iii"
	// MethodMonteCarlo marks thresholds taken from the empirical
	// quantiles of simulated Gaussian-noise SK values.
	MethodMonteCarlo = "monte-carlo"
)

// ErrParameter is wrapped by the errors NewThresholds and
// TypeIIIThresholds return for parameters outside their domain.
var ErrParameter = errors.New("skstat: invalid parameter")

// Estimate returns the generalized spectral kurtosis estimator of
// Nita & Gary (2010b) eq. 8,
//
//	SK = (M·N·d + 1)/(M − 1) · (M·S2/S1² − 1),
//
// where s1 = Σ P_i and s2 = Σ P_i² are accumulated over m power values P_i,
// each the sum of n raw power spectra with Gamma shape factor d (d = 1 for
// |X(f)|² of complex Gaussian data). Estimate returns NaN if s1 == 0 or
// m < 2.
func Estimate(s1, s2 float64, m, n int, d float64) float64 {
	if s1 == 0 || m < 2 {
		return math.NaN()
	}
	fm := float64(m)
	return (fm*float64(n)*d + 1) / (fm - 1) * (fm*s2/(s1*s1) - 1)
}

// Moments holds the mean and the central moments μ2, μ3 and μ4 of a
// distribution.
type Moments struct {
	Mean, Var, M3, M4 float64
}

// NullMoments returns the moments of the estimator SK (see Estimate) for
// Gaussian noise, from Nita & Gary (2010b) eq. 9. With Nd = N·d,
//
//	Mean = 1
//	μ2 = 2M²·Nd(1+Nd) / [(M−1)(M·Nd+2)(M·Nd+3)]
//	μ3 = 8M³·Nd(1+Nd)·[−2 + Nd(−5 + M(4+Nd))]
//	     / [(M−1)²(M·Nd+2)(M·Nd+3)(M·Nd+4)(M·Nd+5)]
//	μ4 = 12M⁴·Nd(1+Nd)·[24 + Nd(48 + 84Nd + M(−32 + Nd(−245 − 93Nd
//	     + M(125 + Nd(68 + M + (3+M)Nd)))))]
//	     / [(M−1)³(M·Nd+2)(M·Nd+3)(M·Nd+4)(M·Nd+5)(M·Nd+6)(M·Nd+7)]
//
// NullMoments panics if m < 2, n < 1 or d is not positive.
func NullMoments(m, n int, d float64) Moments {
	if m < 2 || n < 1 || !(d > 0) || math.IsInf(d, 1) {
		panic(fmt.Sprintf("skstat: NullMoments(m=%d, n=%d, d=%v) out of domain", m, n, d))
	}
	fm := float64(m)
	nd := float64(n) * d
	mn := fm * nd
	c := nd * (1 + nd)
	m1 := fm - 1
	d23 := (mn + 2) * (mn + 3)
	d45 := (mn + 4) * (mn + 5)
	d67 := (mn + 6) * (mn + 7)
	m2 := fm * fm
	return Moments{
		Mean: 1,
		Var:  2 * m2 * c / (m1 * d23),
		M3:   8 * m2 * fm * c * (-2 + nd*(-5+fm*(4+nd))) / (m1 * m1 * d23 * d45),
		M4: 12 * m2 * m2 * c *
			(24 + nd*(48+84*nd+fm*(-32+nd*(-245-93*nd+fm*(125+nd*(68+fm+(3+fm)*nd)))))) /
			(m1 * m1 * m1 * d23 * d45 * d67),
	}
}

// Thresholds holds the lower and upper detection limits for SK and the
// method they were derived with (MethodPearsonIV, MethodPearsonIII or
// MethodMonteCarlo).
type Thresholds struct {
	Lower, Upper float64
	Method       string
}

// Flags classifies an SK value against t: it returns −1 if sk < t.Lower
// (coherent, CW-like excess), +1 if sk > t.Upper (intermittent excess) and
// 0 otherwise, including for NaN (an empty bin carries no evidence).
func (t Thresholds) Flags(sk float64) int {
	switch {
	case sk < t.Lower:
		return -1
	case sk > t.Upper:
		return 1
	}
	return 0
}

// NewThresholds returns the SK limits for m accumulated power values of n
// raw spectra each, Gamma shape factor d, and false-alarm probability pfa on
// each side, so that P(SK < Lower) = P(SK > Upper) = pfa under the Gaussian
// null hypothesis.
//
// The null distribution is modelled by the Pearson type IV density with the
// moments of NullMoments (Heinrich 2004): with β1 = μ3²/μ2³ and
// β2 = μ4/μ2²,
//
//	r = 6(β2 − β1 − 1)/(2β2 − 3β1 − 6),  m = 1 + r/2,
//	ν = −r(r−2)·√β1·sign(μ3) / √(16(r−1) − β1(r−2)²),
//	a = (√μ2/4)·√(16(r−1) − β1(r−2)²),  λ = 1 + a·ν/r,
//
// and its distribution function is integrated numerically (see the package
// documentation). If the moments lie outside the type IV region (the
// criterion κ = 2μ2(3μ2² − μ4) + 3μ3² of Nita & Gary 2010b eq. 11 is not
// negative, or the type IV discriminant is not positive), NewThresholds
// returns the type III limits of TypeIIIThresholds instead; Method records
// which was used.
//
// NewThresholds returns an error wrapping ErrParameter if m < 4, n < 1,
// d is not positive and finite, or pfa is not in (0, 0.5).
func NewThresholds(m, n int, d, pfa float64) (Thresholds, error) {
	if err := checkParams(m, n, d, pfa); err != nil {
		return Thresholds{}, err
	}
	mo := NullMoments(m, n, d)
	p, ok := fitPearsonIV(mo)
	if !ok {
		return typeIII(mo, pfa, m, n, d)
	}
	var tab p4Table
	tab.init(p, pfa)
	t := Thresholds{
		Lower:  tab.lowerQuantile(pfa),
		Upper:  tab.upperQuantile(pfa),
		Method: MethodPearsonIV,
	}
	if !(t.Lower < t.Upper) || math.IsInf(t.Lower, 0) || math.IsInf(t.Upper, 0) {
		return Thresholds{}, fmt.Errorf("skstat: Pearson IV thresholds for M=%d N=%d d=%v PFA=%v did not resolve: [%v, %v]",
			m, n, d, pfa, t.Lower, t.Upper)
	}
	return t, nil
}

// TypeIIIThresholds returns the SK limits from the Pearson type III
// approximation of Nita & Gary (2010b) eq. 19–21: with
//
//	δ = μ1 − 2μ2²/μ3,  β = 4μ2³/μ3²,  α = μ3/(2μ2),
//
// the null distribution function is CDF(x) = P(β, (x − δ)/α), where P is the
// regularized lower incomplete gamma function. The lower limit solves
// CDF(x) = pfa and the upper limit 1 − CDF(x) = pfa. The approximation
// matches only three moments and is too tight on the lower side for small m;
// NewThresholds is preferred. The parameters are checked as in
// NewThresholds.
func TypeIIIThresholds(m, n int, d, pfa float64) (Thresholds, error) {
	if err := checkParams(m, n, d, pfa); err != nil {
		return Thresholds{}, err
	}
	return typeIII(NullMoments(m, n, d), pfa, m, n, d)
}

func checkParams(m, n int, d, pfa float64) error {
	switch {
	case m < 4:
		return fmt.Errorf("%w: M = %d accumulations, need at least 4", ErrParameter, m)
	case n < 1:
		return fmt.Errorf("%w: N = %d raw spectra per accumulation, need at least 1", ErrParameter, n)
	case !(d > 0) || math.IsInf(d, 1):
		return fmt.Errorf("%w: shape factor d = %v, need a positive finite value", ErrParameter, d)
	case !(pfa > 0 && pfa < 0.5):
		return fmt.Errorf("%w: false-alarm probability %v per side, need 0 < PFA < 0.5", ErrParameter, pfa)
	}
	return nil
}

// typeIII evaluates the type III limits for the moments mo.
func typeIII(mo Moments, pfa float64, m, n int, d float64) (Thresholds, error) {
	if mo.M3 == 0 {
		return Thresholds{}, fmt.Errorf("skstat: type III fit for M=%d N=%d d=%v: zero third moment", m, n, d)
	}
	alpha := mo.M3 / (2 * mo.Var)
	beta := 4 * mo.Var * mo.Var * mo.Var / (mo.M3 * mo.M3)
	delta := mo.Mean - 2*mo.Var*mo.Var/mo.M3
	gLo := mathext.GammaIncRegInv(beta, pfa)     // P(β, g) = pfa
	gHi := mathext.GammaIncRegCompInv(beta, pfa) // 1 − P(β, g) = pfa
	if alpha < 0 {
		// X = δ + αG decreases with G: the tails swap.
		gLo, gHi = gHi, gLo
	}
	t := Thresholds{
		Lower:  delta + alpha*gLo,
		Upper:  delta + alpha*gHi,
		Method: MethodPearsonIII,
	}
	if math.IsNaN(t.Lower) || math.IsNaN(t.Upper) || !(t.Lower < t.Upper) {
		return Thresholds{}, fmt.Errorf("skstat: type III thresholds for M=%d N=%d d=%v PFA=%v did not resolve: [%v, %v]",
			m, n, d, pfa, t.Lower, t.Upper)
	}
	return t, nil
}
