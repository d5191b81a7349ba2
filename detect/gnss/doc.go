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
// A Software-Defined GPS and Galileo Receiver, ch. 6). Its Doppler grid
// spans ±(DopplerMaxHz + ClockMaxHz), by default ±(5 + 10) kHz: the
// geometric ±4.9 kHz of a static receiver plus a receiver clock offset of
// up to 10 kHz (6 ppm at L1; a 2 ppm TCXO gives 3.2 kHz, REFERENCES §12.5).
// AcquireAround searches a window of the same grid (the narrow search
// once a site's clock offset is known); the threshold is that of the
// whole grid in both, so a satellite inside the window gets the same
// decision either way. The wide search takes the PRNs in batches of
// eight and cuts the window of the later batches to the Dopplers the
// detections so far allow (a common clock, geometric Dopplers within
// ±DopplerMaxHz), which takes a third off it. The snapshot is
// mixed to L1 and integrated-and-dumped onto a grid of 4096 cells per
// millisecond (4 cells per chip), so every sample rate maps onto
// power-of-two FFTs and no input sample is merged with another at
// fs ≤ 4.096 MS/s; the code replica is binned the same way. Each 1 ms block
// y_k is transformed once per base frequency b of the Doppler grid (0 and
// −500 Hz for the default 500 Hz steps, inside the 2/(3T) bin
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
// The dB value of a noisy estimate is biased low (Jensen's inequality:
// −0.86 dB at 30 dB-Hz with the ~190 prompts of 0.25 s, measured):
// MomentCN0.CN0dB removes the second-order (delta-method) bias of ln Ŝ/N̂,
// so that tracked C/N0 is unbiased within ±0.5 dB from 30 to 53 dB-Hz on
// 0.25 s captures (TestTrackCN0Accuracy, against the synthesizer's exact
// C/N0).
//
// A lock monitor watches every strong channel (S/N ≥ 5 per prompt,
// 37 dB-Hz): the mean of its last eight prompts falling below 0.3·(S + N)
// is a loss of lock, and the estimate stops there. When every strong
// channel loses lock within 3 ms, the capture lost samples there
// (REFERENCES §12.7: a sample drop shifts every code phase at once), and
// Tracker.SharedLoss reports it; every channel's estimate stops at it.
//
// C/N0 here is referred to the noise in the correlator, so interference and
// the other satellites' signals count as noise (effective C/N0, Betz 2001;
// REFERENCES §7).
//
// # Interference mitigation
//
// Mitigator cleans a copy of the acquisition snapshot (Hegarty et al. 2000
// for blanking; frequency-domain and short-time excision, see Mitigator):
// pulse blanking at 13 times the robust noise power; the receiver's
// passband estimated from the snapshot so that a band that is not flat
// is not excised for its shape; excision over ~1 ms frames where lines
// were seen and over ~16 µs and ~6 µs frames where narrowband transients
// (sweeps) were; blanking again. On a clean band it costs 2.7 ms per
// 10 ms snapshot at 10 MS/s (BenchmarkMitigate10ms).
//
// # Second correlation peaks
//
// Spoofing and meaconing show as a second correlation peak of a PRN
// (REFERENCES §11.3, §11.5). The search keeps, for every Doppler row
// whose maximum passed γ, its largest cell beyond ±2 chips of that maximum,
// and for every PRN the block correlations around its best cell; then
// (Acquirer.Correlations, peaks.go) a far second peak is the largest such
// cell of the whole grid above γ, and a near one an earlier, weaker path
// 0.9–3 chips before the strongest, separated by a weighted two-path fit
// of the correlation power profile against the search's own correlation
// shape (multipath is later and weaker: never reported). Each candidate
// must still pass its threshold after the cross-correlation and
// sidelobes that every stronger peak, its own first included, predicts in
// its cell. Both peaks get their code phase, Doppler and SNR λ̂ (corrected
// for the Doppler bin's loss), the pair its delay and power ratio, and
// the correlation power around them for the analyst's report. Measured
// on synthesized skies of eight satellites at 40–53 dB-Hz
// (TestSecondPeaks): peaks within 0.1 chip (0.25 below λ̂ = 15), a meacon's
// delay within 0.05 chip in the median over PRNs, the power ratio's mean
// over a capture within 1 dB; none on captures with multipath 0.2–0.8
// chip late or clean ones. The Meter reports them only for the
// satellites tracking kept, and not when mitigation reshaped the snapshot
// (20 % of its power excised or 0.1 % of its samples blanked: the
// interferer's gating copies every peak at its period), with a note. It
// also measures the snapshot's in-band power within ±1.023 MHz of L1
// before mitigation (Mitigator.SetBand) and each tracked satellite's code
// Doppler against its carrier Doppler/1540 (Measurement.CodeRates).
//
// # Meter
//
// Meter puts it together per capture and keeps what it learns about a
// site (one input) from capture to capture:
//
//   - Receiver clock: the whole clock range is searched while the site's
//     offset is unknown (and again when the narrow search finds fewer than
//     half the satellites the site had); afterwards the window its last
//     satellites bound: each Doppler is a geometric one within
//     ±DopplerMaxHz plus the clock offset, so the offset lies in
//     [max D_i − DopplerMaxHz, min D_i + DopplerMaxHz], and the next
//     capture's satellites within DopplerMaxHz (and a Doppler step) of
//     that interval (±5.5 kHz for eight satellites over ±5 kHz; wider
//     than the former median ± 7 kHz only when a few close satellites
//     leave the offset loose). The capture's clock offset (ClockOffset)
//     is the median Doppler of the satellites measured: without
//     ephemeris it includes the median geometric Doppler of the
//     satellites in view.
//   - Spectrum orientation: at the end of the pull-in, the weighted
//     regression of each satellite's code-rate error on its carrier
//     Doppler (REFERENCES §12.2, §11.4) has slope 0 in the right
//     orientation and −2/1540 in the wrong one, for any clock offset; the
//     orientation is decided at 4 standard errors, and the tracker is
//     restarted on the conjugated samples if it was wrong (see Meter).
//     MeterConfig.Inverted forces it.
//   - Interference: acquisition runs on the mitigated snapshot; tracking
//     on the samples as they are (an ordinary receiver's effective C/N0)
//     unless mitigation removed 90 % of the snapshot's power or blanked
//     1 % of it, when the moment estimator would take the interference
//     left in the prompts for signal: tracking then runs on blocks
//     mitigated with the snapshot's decisions (Mitigator.MitigateBlock:
//     its stages, passband and blanking thresholds, so that no passband
//     estimate or median runs per sample; 0.22 s of CPU per second of a
//     10 MS/s capture under a 15 µs chirp at J/N 12 dB, 0.78 s when every
//     block was mitigated on its own; BenchmarkPipeline_1s_10MSps/chirp)
//     and a note says so.
//   - Satellites that are there: an interferer that repeats every 1/n ms
//     (a sweep every 100 µs has lines every 10 kHz) correlates with every
//     C/A code (lines every 1 kHz) into peaks at whole-kHz offsets from
//     its lines, fixed in the receiver's time; mitigation that leaves part
//     of it (J/N −8 to 2 dB for the bank's in-band sweep, which at −6 dB
//     excises nothing) lets them through acquisition on many PRNs. Before
//     a PRN is reported its code's drift against the carrier-aided NCO
//     over the whole track (ChannelState.DriftErr) must be a satellite's:
//     code Doppler is f_D/1540 (REFERENCES §11.4), so a satellite drifts
//     by 0 and a peak fixed in the receiver's time by −f_D/1540; PRNs
//     drifting like the latter at 5 standard errors, and then the others
//     on the same 1 kHz line grid that cannot be told from them, are
//     rejected with a note (Measurement.Standing, standingChannels).
//   - Short captures: below the 10 ms snapshot nothing is measured (a
//     note); from 10 ms to the ~110 ms tracking needs, the acquired
//     satellites are reported as MethodAcquired, with the loops' values
//     once they have pulled in (C/N0 from 20–49 prompts, or else from the
//     acquisition peak), and the capture is marked Unmeasured for C/N0
//     comparisons.
//   - False satellites: no PRN outside the capture was reported in 200
//     noise-only captures nor in the interference bank (CW, tones, sweeps
//     in and wider than the band, DME-like pairs, rectangular pulse
//     trains, noise bands, wideband noise, J/N 10–40 dB:
//     TestInterferenceBank; −6 to 8 dB: TestIssue14LowJN, where the
//     in-band 100 µs sweep made 31 in 8 captures at 2 dB before the code
//     drift test). Satellites of 40 dB-Hz and more are found
//     (≥ 75 %, 4 MS/s) up to J/N 40 dB for CW and tones, sweeps wider than
//     the band and slow sweeps, DME-like pairs, rectangular pulses (1 µs
//     pulses from 20 dB: at 10 dB they stay under the blanking threshold
//     and act as noise) and 200 kHz noise bands; up to 10 dB for a sweep
//     of 2.4 MHz inside the band every 100 µs and a 1 MHz noise band; for
//     wideband noise, as the C/N0 left, 10·log10(1 + J/N) lower, allows
//     (only 50 dB-Hz satellites survive 10 dB). When none survives, a
//     note says the satellites are lost, not absent.
//
// Measured on the real recordings of testdata/realdata (their README's
// values from an independent analysis): the 4 MS/s file's inversion is
// found and its six satellites of 38.8 dB-Hz and more are tracked with
// Doppler within 10 Hz, code phase within 0.02 chip and C/N0 within
// 0.45 dB; the 100 ms real-IF file's nine satellites are found (Doppler
// within 5 Hz, code phase within 0.04 chip) and its sample drop is
// reported at 87.7 ms.
package gnss
