package analysis

// MethodText is the method statement the workbook prints on its Summary
// sheet: what each figure is and how it was obtained, in the words of the
// code that computes it (README "What is measured" says the same). Each
// entry is one paragraph.
func MethodText() []string {
	return []string{
		"Coefficient: least-squares slope of the meter against the stimulus as read back, divided by the fixture's noise gain K: a signed input-referred coefficient k in µV of offset per volt of the named stimulus. Ratio = 20·log10(10⁶/|k|) dB (JEDEC JESD99B).",
		"Fit terms: a drift-in-time term where the plan asks for it (noted when dropped, or when its variance inflation exceeds 10); a quadratic term where the plan asks for it or where the curvature test (two-sided t at 95 %) fires, and then the coefficient is the slope at the centre of the sweep; a separate offset for each session when a sweep spans a resume.",
		"cmrr is the common-mode coefficient k_c with the output held. Shifting the supplies (or driving the inputs of a noise-gain stage) moves the output too and measures k_c + k_o: that figure is reported as cmrr_uncorrected, and cmrr is formed as k − k_o from the aol result of the same unit and temperature. Without an aol test there is no cmrr, and the note of cmrr_uncorrected bounds k_o by the part's rated A_OL (part.aol_min_db).",
		"psrr_sym is per volt of total supply span (each rail moves half of it); a per-rail figure is 6.02 dB lower. psrr_worst is the lower of psrr_pos and psrr_neg.",
		"Two-rail steps (supply-shift cmrr, psrr_sym) are corrected for unequal supply channel gains from both rails' read-backs, with k_p and k_n from the single-rail tests; budget rows carry the uncertainty of k_p, k_n and the supplies' read-back gain accuracy. On a noise-gain stage every coefficient is scaled by 1/(1 − K·k_o); with a rated A_OL it is a budget row.",
		"Uncertainty (JCGM 100:2008): Type A from the fit, Type B for the noise-gain tolerance, the meter gain and the stimulus read-back gain (rectangular); combined by the law of propagation, ν_eff by Welch–Satterthwaite, U = k·u with k from Student's t at 95 % two-sided. Columns say which: 'standard uncertainty u' or 'expanded uncertainty U'.",
		"Unresolved: when |k| ≤ U the coefficient is not told from zero; the ratio is left empty (null in JSON) and only the lower bound 20·log10(10⁶/(|k| + U)) is stated. U is the two-sided 95 % expanded uncertainty, so the bound holds with at least 97.5 % one-sided confidence (EURACHEM/CITAC CG4 Appendix F). The reported figure moves from the ratio to the bound when |k| falls to U, a step of 20·log10((|k| + U)/|k|) ≥ 6.02 dB: the lower end of a resolved result's interval, 20·log10(10⁶/(|k| + U)), is the same formula and is continuous.",
		"Decisions (ILAC-G8:09/2019 §4.2): simple acceptance (w = 0) compares the measured value with the limit, also for an unresolved result (its point estimate 20·log10(10⁶/|k|)); guarded acceptance (w = U) gives pass, conditional pass, conditional fail, fail, and judges an unresolved result by its lower bound.",
		"Notes: every sentence the analysis attaches to a result (terms added or dropped, corrections, points flagged or left out, what a figure contains) travels with it: the Notes column here and in the CSV, the notes list in the JSON lines.",
	}
}
