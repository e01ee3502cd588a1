package fit

import (
	"fmt"
	"math"
	"slices"
)

// OutlierMethodGESD names the outlier test used by Lot.
const OutlierMethodGESD = "generalized ESD (Rosner 1983, Technometrics 25:165; NIST/SEMATECH e-Handbook 1.3.5.17.3)"

// Lot summarises one test over a lot of parts against a lower specification
// limit LSL (e.g. CMRR values in dB against 85 dB):
//
//	mean, SD (n − 1 divisor), min, median, max
//	Cpl = (mean − LSL)/(3·SD)                         (one-sided capability)
//	lower tolerance bound = mean − k·SD,  k = t'_γ(n−1, z_P·√n)/√n
//	                                                  (ToleranceFactorLower)
//	yield = #(x ≥ LSL)/n
//
// and flags outliers by Rosner's generalized extreme studentized deviate
// test (Technometrics 25, 1983, pp. 165-172; NIST/SEMATECH e-Handbook
// §1.3.5.17.3), two-sided at OutlierAlpha with at most MaxOutliers
// suspects: R_i = max|x − x̄|/s over the remaining values, critical value
//
//	λ_i = (n−i)·t_{p, n−i−1} / √((n−i−1 + t²_{p,n−i−1})·(n−i+1)),  p = 1 − α/(2(n−i+1))
//
// and the outliers are the r most extreme where r is the largest i with
// R_i > λ_i (for i = 1 this is Grubbs' test). The statistics above include
// the flagged values: outliers are reported, not removed. n < 2 returns
// ErrTooFewPoints; NaN or Inf returns ErrBadInput naming the index. With
// SD = 0, Cpl and the tolerance bound are left zero (CplDefined false).
func Lot(values []float64, lowerLimit float64, opt LotOptions) (LotStats, error) {
	n := len(values)
	if n < 2 {
		return LotStats{}, fmt.Errorf("fit: lot statistics need at least 2 results, have %d: %w", n, ErrTooFewPoints)
	}
	if i := firstNonFinite(values); i >= 0 {
		return LotStats{}, fmt.Errorf("fit: lot result %d is %v: %w", i, values[i], ErrBadInput)
	}
	if math.IsNaN(lowerLimit) || math.IsInf(lowerLimit, 0) {
		return LotStats{}, fmt.Errorf("fit: lower limit %v: %w", lowerLimit, ErrBadInput)
	}
	cov, conf := opt.Coverage, opt.Confidence
	if cov == 0 {
		cov = 0.95
	}
	if conf == 0 {
		conf = 0.95
	}
	if !(cov > 0 && cov < 1) || !(conf > 0 && conf < 1) {
		return LotStats{}, fmt.Errorf("fit: tolerance coverage %v / confidence %v must be in (0, 1): %w", cov, conf, ErrBadInput)
	}
	s := LotStats{Unit: opt.Unit, N: n, LowerLimit: lowerLimit, Coverage: cov, Confidence: conf, OutlierMethod: OutlierMethodGESD}
	s.Mean, s.SD = meanSD(values)
	sorted := slices.Clone(values)
	slices.Sort(sorted)
	s.Min, s.Max = sorted[0], sorted[n-1]
	if n%2 == 1 {
		s.Median = sorted[n/2]
	} else {
		s.Median = (sorted[n/2-1] + sorted[n/2]) / 2
	}
	for _, v := range values {
		if v >= lowerLimit {
			s.PassCount++
		}
	}
	s.Yield = float64(s.PassCount) / float64(n)
	s.ToleranceK = ToleranceFactorLower(n, cov, conf)
	if s.SD > 0 {
		s.CplDefined = true
		s.Cpl = (s.Mean - lowerLimit) / (3 * s.SD)
		s.LowerToleranceBound = s.Mean - s.ToleranceK*s.SD
	}
	alpha := opt.OutlierAlpha
	if alpha == 0 {
		alpha = 0.05
	}
	r := opt.MaxOutliers
	if r == 0 {
		r = min(max(1, n/10), 10)
	}
	s.Outliers = GeneralizedESD(values, r, alpha)
	return s, nil
}

// GeneralizedESD returns the indices of the outliers found by Rosner's
// generalized ESD test with at most maxOutliers suspects at significance
// alpha (see Lot). Fewer than 3 values, or maxOutliers ≤ 0, give none; the
// number of suspects is capped at n − 2 (the critical value needs
// n − i − 1 ≥ 1 degrees of freedom).
func GeneralizedESD(values []float64, maxOutliers int, alpha float64) []int {
	n := len(values)
	r := min(maxOutliers, n-2)
	if n < 3 || r <= 0 || !(alpha > 0 && alpha < 1) {
		return []int{}
	}
	alive := make([]bool, n)
	for i := range alive {
		alive[i] = true
	}
	removed := make([]int, 0, r)
	found := 0
	for i := 1; i <= r; i++ {
		// mean and SD of the remaining values
		m, cnt := 0.0, 0
		for j, v := range values {
			if alive[j] {
				m += v
				cnt++
			}
		}
		m /= float64(cnt)
		ss := 0.0
		for j, v := range values {
			if alive[j] {
				ss += (v - m) * (v - m)
			}
		}
		sd := math.Sqrt(ss / float64(cnt-1))
		if sd == 0 {
			break
		}
		worst, wdev := -1, -1.0
		for j, v := range values {
			if alive[j] && math.Abs(v-m) > wdev {
				worst, wdev = j, math.Abs(v-m)
			}
		}
		R := wdev / sd
		alive[worst] = false
		removed = append(removed, worst)
		if R > ESDCritical(n, i, alpha) {
			found = i
		}
	}
	out := slices.Clone(removed[:found])
	slices.Sort(out)
	return out
}

// ESDCritical returns Rosner's critical value λ_i for the i-th suspect of n
// values at two-sided significance alpha (see Lot); for i = 1 it is the
// two-sided Grubbs (1969) critical value.
func ESDCritical(n, i int, alpha float64) float64 {
	nu := n - i - 1
	if nu < 1 {
		return math.NaN()
	}
	p := 1 - alpha/(2*float64(n-i+1))
	t := StudentTQuantile(p, DOF(nu))
	return float64(n-i) * t / math.Sqrt((float64(nu)+t*t)*float64(n-i+1))
}

// meanSD returns the mean and the sample standard deviation (n − 1).
func meanSD(v []float64) (m, sd float64) {
	m = mean(v)
	if len(v) < 2 {
		return m, 0
	}
	ss := 0.0
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return m, math.Sqrt(ss / float64(len(v)-1))
}
