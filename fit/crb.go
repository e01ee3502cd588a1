package fit

import "math"

// SlopeCRBPoints is the least number of points a straight-line fit
// y = a + b·x needs for the standard uncertainty of its slope to reach
// uSlope, when each point has independent Gaussian noise of standard
// deviation sigma and x may lie anywhere in [−halfRange, +halfRange]:
//
//	var(b̂) ≥ σ² / Σ(x_i − x̄)²                      (Cramér–Rao bound of the linear Gaussian model)
//	Σ(x_i − x̄)² ≤ N·halfRange²                      (all points at the two ends, half at each)
//	N_min = (σ / (halfRange · uSlope))²
//
// The least-squares slope attains the bound, so this is also its best
// design (Kay, Fundamentals of Statistical Signal Processing: Estimation
// Theory, Prentice Hall 1993, §3.5 and example 3.7 on line fitting; page
// from memory). N_min is returned unrounded (a continuous bound); it is
// +Inf for a zero range or target.
func SlopeCRBPoints(sigma, halfRange, uSlope float64) float64 {
	if !(halfRange > 0) || !(uSlope > 0) {
		return math.Inf(1)
	}
	r := sigma / (halfRange * uSlope)
	return r * r
}
