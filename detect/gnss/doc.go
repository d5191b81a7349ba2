// Package gnss acquires GPS L1 C/A signals in complex-baseband IQ captures
// and estimates each satellite's carrier-to-noise density ratio C/N0.
//
// # Input
//
// Samples are complex64 at any rate fs ≥ 2.046 MS/s (4, 5, 10, 20 MS/s and
// rates that are not multiples of 1.023 MHz alike), centred at fc. L1 sits
// at the offset L1 − fc, which must lie within ±(fs/2 − 1.1 MHz) so that the
// C/A main lobe (±1.023 MHz) is inside the band; otherwise NewAcquirer and
// NewTracker return an error wrapping ErrL1NotInBand whose text starts with
// "skipped: capture centre … MHz does not contain GPS L1". Memory is bounded
// by the configuration, never by the capture: acquisition reads one
// snapshot of K·T (10 ms by default), tracking consumes blocks of any
// length.
//
// # Acquisition
//
// Acquirer implements the parallel code-phase search (Borre et al. 2007,
// A Software-Defined GPS and Galileo Receiver, ch. 6). The snapshot is
// mixed to L1 and integrated-and-dumped onto a grid of 4096 cells per
// millisecond (4 cells per chip), so every sample rate maps onto
// power-of-two FFTs and no input sample is merged with another at
// fs ≤ 4.096 MS/s; the code replica is binned the same way. Each 1 ms block
// y_k is transformed once per base frequency b of the Doppler grid (0 and
// −500 Hz for the default ±5 kHz in 500 Hz steps, inside the 2/(3T) bin
// width of Kaplan & Hegarty 2006, Understanding GPS, from memory): the
// Doppler bin f_D = b + s/T is the spectrum shifted by s bins. The spectrum
// is shared by all PRNs, each multiplying its central half (|f| <
// 1.024 MHz, the C/A main lobe) by its precomputed conj(FFT(replica)) and
// transforming back with a half-length IFFT, which yields the band-limited
// circular correlation at 2048 half-chip lags per millisecond:
//
//	z_k(τ) = IFFT_{N/2}(Y_k[m + s]·R*[m], |m| < N/4)(τ),   S(f_D, τ) = Σ_{k=1}^{K} |z_k(τ)|².
//
// The two quarter-chip lags beside each row's maximum are interpolated
// from the lag cells (a Lanczos kernel; the correlation is band-limited to
// their Nyquist band), so the search loses no more than on a 4096-lag grid.
// The rows at whole multiples of 1/T (the anchors) are computed for every
// PRN; a half-bin row between two anchors is first interpolated from them,
// Σ_k |z_{s}(τ) − z_{s+1}(τ)|² (the two-bin interpolation of the DFT at a
// half bin, which keeps at least 81 % of the row's SNR), and computed
// exactly only if that interpolation's normalized maximum exceeds
// γ_s = K + 0.6·(γ − K). Detection uses exact rows only.
//
// Detection statistics (REFERENCES §4, square-law detection): with σ² the
// noise power of one |z_k|² cell, S/σ² is Gamma(K, 1) under H0 (a sum of K
// unit exponentials). σ² is estimated per Doppler row as the mean of S/K
// over the row without ±1.5 chips around the row's maximum. The per-cell
// false-alarm probability is P_fa = Pfa/N_cells (N_cells = Doppler bins ×
// 4096 quarter-chip lags, the union bound for the overall P_FA of one PRN
// search) and the threshold γ solves
//
//	P_fa = Q(K, γ) = e^{−γ} Σ_{i=0}^{K−1} γ^i/i!
//
// (DetectionThreshold, via gonum mathext.GammaIncRegCompInv). Under H1 with
// per-block SNR λ = C/N0·T, S/σ² is non-central with mean K(1 + λ). A PRN is
// reported when max S/σ² > γ. Detections explained by the Gold-code
// cross-correlation of a much stronger detected satellite are then removed
// (Acquirer.rejectCrossCorrelation documents the test). Refinement: the
// code phase by parabolic interpolation over the peak cell and its two
// neighbours; the Doppler from the phase rotation between consecutive 1 ms
// prompts, Δf = arg Σ P_{m+1}·conj(P_m)/(2π·1 ms).
//
// The FFT is quietband/detect/fft (complex64, unnormalized), used through a
// small internal interface so that another implementation can be swapped
// in.
//
// # Tracking and C/N0
//
// Tracker runs, per satellite, a carrier phase accumulator (NCO), a
// carrier-aided code NCO at 1.023 MHz·(1 + f_D/L1) (code Doppler f_D/1540
// chips/s), early/prompt/late correlators dumped on every replica code
// epoch (≈ 1 ms) regardless of block boundaries, a first-order
// frequency-locked loop with the bit-insensitive discriminator
// atan(Im D/Re D)/(2πT), D = P_k·conj(P_{k−1}), and a first-order
// delay-locked loop on the normalized early-minus-late envelope. The
// correlators run at the chip rate: a front end shared by all satellites
// mixes the input to L1 and keeps its running sum S[n], and each replica,
// constant between its chip edges, reduces by summation by parts to
// ±2·S[b] at the code transitions (about 1.6 look-ups per chip and
// satellite at any sample rate; Tracker documents the formula). After a
// 60 ms pull-in, the 1 ms prompts feed the moment-method C/N0 estimator of
// Pauluzzi & Beaulieu 2000 (MomentCN0):
//
//	M2 = ⟨|P|²⟩, M4 = ⟨|P|⁴⟩, U = (K·M2² − M4)/(K − 1),
//	S = √(2U − M4), N = M2 − S, C/N0 = S/(N·T),
//
// where U is the unbiased estimate of (E|P|²)² (the bias correction of
// MomentCN0). The estimator is insensitive to the carrier phase and to the
// data bits, and with T = 1 ms to residual frequency error (the coherent
// loss sinc²(πΔfT) is 0.009 dB at 25 Hz), so no bit synchronization or
// phase lock is needed. The narrowband-wideband power ratio of Van
// Dierendonck 1996 (REFERENCES §3.1) would need 20 ms bit-aligned sums and a
// frequency error of a few hertz (3.9 dB loss at 25 Hz). With the ~190
// prompts of a 0.25 s capture the moment estimate scatters by about
// 0.45–0.85 dB (35–50 dB-Hz); its spread falls as 1/√(capture length).
//
// C/N0 here is referred to the noise in the correlator, so interference and
// the other satellites' signals count as noise (effective C/N0, Betz 2001;
// REFERENCES §7).
package gnss
