// Package skstat provides the statistics of the generalized spectral
// kurtosis (SK) estimator used to flag non-Gaussian frequency bins: the
// estimator itself, its moments when the input is Gaussian noise, and
// detection thresholds for a configured false-alarm probability.
//
// # Estimator
//
// Per frequency bin, M power values P_i are accumulated as S1 = Σ P_i and
// S2 = Σ P_i². Each P_i is the sum of N raw power spectra, and d is the shape
// factor of the Gamma distribution of one raw power value (d = 1 for |X(f)|²
// of complex Gaussian data, d = 0.5 for squared real samples). The
// generalized estimator (Nita & Gary 2010b, MNRAS 406:L60, eq. 8) is
//
//	SK = (M·N·d + 1)/(M − 1) · (M·S2/S1² − 1),
//
// which has expectation 1 for Gaussian noise whatever M, N and d. A steady
// carrier pushes SK below 1; interference present in fewer than half of the
// M accumulations pushes it above 1.
//
// # Moments
//
// NullMoments evaluates the central moments μ2, μ3 and μ4 of SK under the
// Gaussian null hypothesis from Nita & Gary (2010b) eq. 9. For N = d = 1 the
// variance reduces to μ2 = 4M²/((M−1)(M+2)(M+3)) ≈ 4/M.
//
// # Thresholds
//
// The null distribution of SK is skewed to the right, so limits at 1 ± 3σ do
// not give the intended false-alarm rate on either side (at M = 128 the
// lower one is far too loose and the upper one too tight). NewThresholds
// fits a Pearson type IV density to the four moments, with the
// parameterisation of Heinrich (2004, "A guide to the Pearson type IV
// distribution", CDF note 7000):
//
//	f(x) ∝ [1 + ((x−λ)/a)²]^(−m) · exp(−ν·atan((x−λ)/a)).
//
// Its distribution function has no convenient closed form; it is integrated
// numerically in θ = atan((x−λ)/a), where the density becomes
//
//	f(x) dx ∝ cos^(2m−2)(θ) · exp(−νθ) dθ,   −π/2 < θ < π/2,
//
// a smooth, log-concave, bounded integrand on a finite interval, so
// composite Gauss–Legendre quadrature is accurate deep into both tails. The
// lower and upper thresholds solve CDF(x) = PFA and 1 − CDF(x) = PFA.
//
// The choice of the Pearson family follows the criterion of Nita & Gary
// (2010b) eq. 11, κ = 2μ2(3μ2² − μ4) + 3μ3². Where the moments fall outside
// the type IV region (κ ≥ 0, or the type IV discriminant
// 16(r−1) − β1(r−2)² is not positive, as for very small M or large N·d),
// NewThresholds falls back to the Pearson type III approximation of
// Nita & Gary (2010b) eq. 19–21 and says so in Thresholds.Method. The type
// III thresholds alone are available from TypeIIIThresholds; at small M
// (M ≲ 512) they are too tight on the lower side. Nita & Gary (2010a, PASP
// 122:595) treat the statistics of the N = 1 case.
//
// CalibrateMonteCarlo estimates thresholds empirically from simulated
// Gaussian-noise SK values, as an independent cross-check.
package skstat
