// Package fit turns readings into numbers a test engineer can sign: least
// squares, input-referred rejection coefficients and ratios, GUM uncertainty
// budgets, ILAC-G8 decisions, nulling-loop closure checks, nonlinearity,
// lot and temperature statistics.
//
// It sits in the middle of the flow plan → procedure → readings → fit →
// report: the procedure's analysis step hands it stimulus and meter volts,
// the report prints what it returns. It imports no other nullbench package
// and knows nothing of instruments.
//
// Conventions:
//   - Every result is a named struct with units in the field names
//     (VPerV, UVPerV, DB, Volts, Celsius). Coefficients are signed and input
//     referred; ratios use their magnitude.
//   - Mismatched slice lengths are programmer errors and panic; bad data
//     (too few points, a singular design, a stimulus that did not move)
//     return errors that can be tested with errors.Is (ErrTooFewPoints,
//     ErrSingular, ErrZeroSpan, ErrBadInput).
//
// Standards and sources followed:
//   - Least squares by Householder QR of a centred and scaled design
//     (Golub & Van Loan, Matrix Computations, §5.3), checked against the
//     NIST/ITL Statistical Reference Datasets for linear regression.
//   - JCGM 100:2008 (GUM): Type A and B evaluations (4.2, 4.3), combined
//     standard uncertainty (5.1.2), Welch–Satterthwaite (G.2b), coverage
//     factor from Student's t (G.6.4); checked against GUM H.3.
//   - JEDEC JESD99B k_CMR and k_SVR for CMRR and PSRR (ΔV_IC/ΔV_IO,
//     ΔV_S/ΔV_IO); MIL-STD-883 Methods 4001/4003 nulling loop.
//   - ILAC-G8:09/2019 §4.2 decision rules (simple and guarded acceptance).
//   - EURACHEM/CITAC CG4 Appendix F for results not distinguishable from
//     zero (one-sided bound).
//   - One-sided normal tolerance factors from the non-central t
//     distribution (Owen 1963), whose CDF is evaluated by the Poisson-mixture
//     series of Lenth (1989, Applied Statistics AS 243) summed outward from
//     the Poisson mode as in Benton & Krishnamoorthy (2003).
//   - Sine fits by IEEE Std 1057-2017 §4.1.3.1 (three-parameter) and
//     §4.1.3.3 (four-parameter, seeded by an interpolated DFT peak),
//     coherent sampling plans (IEEE Std 1241-2010 §4.1.4.5), the complex
//     response/stimulus ratio with propagated uncertainty (JCGM 100 §5.1.2,
//     JCGM 102 §6), checked against the published sine-fit vectors in
//     testdata/reference and seeded noisy records.
//   - A single-pole model of ratio against frequency fitted by
//     Levenberg–Marquardt (Moré 1978), checked against NIST StRD nonlinear
//     datasets (Misra1a, DanWood, Chwirut2).
//   - Outliers by Rosner's generalized ESD test (Technometrics 25, 1983),
//     as given in the NIST/SEMATECH e-Handbook §1.3.5.17.3.
//   - Lot-to-lot control: Shewhart X̄–S charts for subgroups of unequal
//     size, c4/A3/B3–B6 from their formulas (Montgomery, Introduction to
//     Statistical Quality Control, §6.3), Western Electric run rules;
//     checked against a published table of the factors and Montgomery's
//     piston-ring example (Tables 6.3/6.4, Example 6.3). The default σ̂ =
//     s_p/c4(ν+1) from the pooled within-lot SD is our own derivation
//     (E[s_p] = c4(ν+1)·σ), checked by simulation against the table. One-sided tolerance bounds
//     and pooled repeatability (GUM 4.2.8) per lot and bench.
//
// # Why CMRR, PSRR+, PSRR− and the open-loop gain are tied
//
// An op-amp has no ground pin: its input offset V_IO can depend only on
// voltages between its own terminals. Write its change as signed
// coefficients, each "ΔV_IO per volt moved, everything else held":
// k_c (both inputs moved; CMRR = 1/|k_c|), k_p (V+ alone; PSRR+ = 1/|k_p|),
// k_n (V− alone; PSRR− = 1/|k_n|) and k_o (the output; A_OL = 1/|k_o|).
// Moving every terminal together by the same voltage changes nothing, so
//
//	k_c + k_p + k_n + k_o = 0
//
// (derived here; the ratios are those of JEDEC JESD99B, k_CMR and k_SVR).
// Consequences used in this package: shifting both rails by s with the
// inputs and output held (the nulling loop of MIL-STD-883 Method 4003)
// gives ΔV_IO = (k_p + k_n)·s = −(k_c + k_o)·s, so it measures CMRR only up
// to the open-loop term; the shift coefficient equals the sum of the two
// single-rail coefficients (the closure check, CheckClosure); a symmetric
// supply change (V+ up by Δ/2, V− down by Δ/2) gives ΔV_IO = (k_p − k_n)·Δ/2.
// Worked example (invented numbers, used by the tests): k_c = +10 µV/V,
// k_p = +4 µV/V, k_o = +0.01 µV/V give k_n = −14.01 µV/V; CMRR 100.00 dB,
// PSRR+ 107.96 dB, PSRR− 97.07 dB, A_OL 160 dB; the supply-shift method
// reads 99.99 dB and the symmetric supply change gives 9.005 µV/V.
package fit
