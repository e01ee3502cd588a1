package plan

import (
	"fmt"
	"sort"
)

// OrderLevels returns the sequence in which one pass visits the levels.
//
// zigzag: start at the centre of the sorted levels and walk outwards,
// alternately above and below (for -10, -5, 0, 5, 10: 0, 5, -5, 10, -10),
// then retrace the same path backwards (-10, 10, -5, 5, 0). Each level is
// visited twice per pass.
//
// symmetric: ascending, then descending (a b c c b a). Each level is
// visited twice per pass.
//
// ascending: each level once, lowest first. A drift in time then looks
// exactly like a slope; use it only to compare.
//
// Why the palindromes cancel drift: a pass of n points taken at equal
// intervals t = 0 … n-1 is a palindrome, so the two visits of every level
// sit at t and n-1-t and their mean time is (n-1)/2, the mean time of the
// whole pass. The least-squares slope of y on x is
//
//	b = Σ (x_i - x̄)(y_i - ȳ) / Σ (x_i - x̄)²
//
// (the straight-line fit of GUM H.3). For a drift y_i = d·t_i the numerator
// is d·Σ_levels (x_l - x̄)·n_l·t̄_l = d·t̄·Σ_levels n_l (x_l - x̄) = 0 because
// every t̄_l equals t̄, so a drift linear in time adds nothing to the slope.
// The zigzag also keeps the first half of a pass balanced about the centre,
// so a pass cut short still has its levels on both sides of it.
//
// Duplicated levels are kept (validation refuses them in plans). An empty
// order means zigzag; an unknown order is a programming error (Validate
// refuses it) and panics.
func OrderLevels(levels []float64, order string) []float64 {
	s := append([]float64(nil), levels...)
	sort.Float64s(s)
	switch order {
	case OrderAscending:
		return s
	case OrderSymmetric:
		out := make([]float64, 0, 2*len(s))
		out = append(out, s...)
		for i := len(s) - 1; i >= 0; i-- {
			out = append(out, s[i])
		}
		return out
	case OrderZigzag, "":
		out := make([]float64, 0, 2*len(s))
		if len(s) == 0 {
			return out
		}
		m := (len(s) - 1) / 2
		out = append(out, s[m])
		for d := 1; len(out) < len(s); d++ {
			if m+d < len(s) {
				out = append(out, s[m+d])
			}
			if m-d >= 0 {
				out = append(out, s[m-d])
			}
		}
		for i := len(s) - 1; i >= 0; i-- {
			out = append(out, out[i])
		}
		return out
	}
	panic(fmt.Sprintf("plan: unknown level order %q", order))
}

// Parts of a board_cmrr test: its common-mode sweep and its differential
// sweep (Reading.Part).
const (
	PartCM   = "cm"
	PartDiff = "diff"
)

// Sweep is one ordered pass of a test's stimulus: Part is "" for every test
// but board_cmrr, which has a common-mode sweep (PartCM, its levels) then a
// differential sweep (PartDiff, its diff_levels).
type Sweep struct {
	Part   string
	Levels []float64 // in the order they are visited
}

// Sweeps returns the sweeps of one pass of t, in the order they run.
func Sweeps(t *Test) []Sweep {
	if t.Kind == TestBoardCMRR {
		return []Sweep{
			{Part: PartCM, Levels: OrderLevels(t.Levels, t.Order)},
			{Part: PartDiff, Levels: OrderLevels(t.DiffLevels, t.Order)},
		}
	}
	return []Sweep{{Levels: OrderLevels(t.Levels, t.Order)}}
}
