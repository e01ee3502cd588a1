package fit

import (
	"fmt"
	"math"
)

// ControlChartMethod names the chart XbarS draws, for workbooks to print.
// The σ estimate is stated apart (SigmaEstimator.Source).
const ControlChartMethod = "Shewhart X̄–S control chart with limits for each lot's own size (x̄ and s charts, Montgomery, Introduction to Statistical Quality Control, §6.3, from memory)"

// C4 returns the bias factor c4(n) = E[s]/σ of the sample standard
// deviation s (n − 1 divisor) of n independent normal observations:
//
//	c4(n) = √(2/(n−1)) · Γ(n/2) / Γ((n−1)/2)
//
// (Montgomery, Introduction to Statistical Quality Control, §6.3 and
// Appendix VI; the same expression underlies the tables of ASTM E2587 —
// both from memory). The gamma ratio is taken through log-gamma so large n
// do not overflow. NaN for n < 2.
func C4(n int) float64 {
	if n < 2 {
		return math.NaN()
	}
	fn := float64(n)
	return math.Sqrt(2/(fn-1)) * math.Exp(lgamma(fn/2)-lgamma((fn-1)/2))
}

// ChartFactors are the X̄ and s chart factors for subgroups of N with limits
// at ±L standard errors (L = 3 in the published tables):
//
//	A3 = L/(c4·√n)                  X̄ limits x̿ ± A3·s̄
//	B3 = max(0, 1 − (L/c4)·√(1−c4²)) s limits B3·s̄, B4·s̄
//	B4 = 1 + (L/c4)·√(1−c4²)
//	B5 = max(0, c4 − L·√(1−c4²))     s limits B5·σ, B6·σ
//	B6 = c4 + L·√(1−c4²)
//
// (Montgomery, Introduction to Statistical Quality Control, §6.3.1 and
// Appendix VI, from memory; checked in the tests against a published table
// of the factors).
type ChartFactors struct {
	N                  int
	Sigmas             float64 // L
	C4, A3, B3, B4, B5 float64
	B6                 float64
}

// Factors returns the chart factors for subgroup size n at ±sigmas
// (0 means 3). NaN factors for n < 2.
func Factors(n int, sigmas float64) ChartFactors {
	if sigmas == 0 {
		sigmas = 3
	}
	c4 := C4(n)
	c5 := math.Sqrt(1 - c4*c4)
	return ChartFactors{
		N: n, Sigmas: sigmas, C4: c4,
		A3: sigmas / (c4 * math.Sqrt(float64(n))),
		B3: math.Max(0, 1-sigmas/c4*c5),
		B4: 1 + sigmas/c4*c5,
		B5: math.Max(0, c4-sigmas*c5),
		B6: c4 + sigmas*c5,
	}
}

// SigmaEstimator chooses how XbarS estimates the within-subgroup σ.
type SigmaEstimator int

const (
	// SigmaPooled: σ̂ = s_p / c4(ν+1), s_p² = Σ(n_i−1)s_i² / ν, ν = Σ(n_i−1).
	// s_p is the s̄ Montgomery pools for subgroups of unequal size
	// (§6.3.2, from memory), but his chart then uses x̿ ± A3(n_i)·s_p, i.e.
	// σ̂ = s_p/c4(n_i) for each subgroup. The single σ̂ here is our own
	// derivation, not his: ν·s_p²/σ² is χ²_ν for normal subgroups with a
	// common σ, and E[√χ²_ν] = √2·Γ((ν+1)/2)/Γ(ν/2), so E[s_p] = c4(ν+1)·σ
	// and s_p/c4(ν+1) is unbiased. Checked by simulation against the
	// published c4 table (fit/control_test.go). The default.
	SigmaPooled SigmaEstimator = iota
	// SigmaMeanS: σ̂ = (1/m) Σ s_i/c4(n_i); for equal n this is s̄/c4(n),
	// the estimate behind Montgomery's x̄ and s charts with limits x̿ ± A3·s̄
	// (§6.3.1, Example 6.3). For unequal n each term is unbiased (derived).
	SigmaMeanS
)

func (e SigmaEstimator) String() string {
	switch e {
	case SigmaPooled:
		return "pooled SD s_p/c4(ν+1)"
	case SigmaMeanS:
		return "mean of s_i/c4(n_i)"
	}
	return fmt.Sprintf("SigmaEstimator(%d)", int(e))
}

// Source says where the estimator comes from, for workbooks to print.
func (e SigmaEstimator) Source() string {
	switch e {
	case SigmaPooled:
		return "our own derivation, not a published chart: ν·s_p²/σ² is χ²_ν, so E[s_p] = c4(ν+1)·σ; the pooled s_p itself is Montgomery's for unequal lot sizes (§6.3.2, from memory), whose limits x̿ ± A3(n_i)·s_p differ from these by c4(ν+1)/c4(n_i)"
	case SigmaMeanS:
		return "for lots of equal size s̄/c4(n), Montgomery §6.3.1 (Example 6.3); for unequal sizes each s_i/c4(n_i) is unbiased (our own extension)"
	}
	return ""
}

// ControlOptions tune XbarS. The zero value gives 3σ limits from the pooled
// SD with the run rules on.
type ControlOptions struct {
	Sigmas    float64 // limit width in standard errors; 0 means 3
	Estimator SigmaEstimator
	// NoRunRules turns off the Western Electric run rules 2–4 (rule 1,
	// a point beyond the limits, is always applied).
	NoRunRules bool
}

// Run rules on the X̄ chart, as in the Western Electric Statistical Quality
// Control Handbook (1956) and Montgomery §5.3.6 (both from memory). Zones
// are in standard errors σ̂/√n_i of each subgroup's own mean, so they hold
// for unequal subgroup sizes.
const (
	RuleBeyondLimits = "1: beyond a control limit"
	RuleTwoOfThree   = "2: 2 of 3 successive beyond 2σ on one side"
	RuleFourOfFive   = "3: 4 of 5 successive beyond 1σ on one side"
	RuleEightOneSide = "4: 8 successive on one side of the centre line"
)

// ControlPoint is one subgroup (lot) on the two charts. The s chart point
// and its limits are defined only when N ≥ 2 (HasSD).
type ControlPoint struct {
	N     int
	Mean  float64
	SD    float64 // n − 1 divisor; 0 when N < 2
	HasSD bool
	// X̄ chart: centre x̿ (ControlChart.GrandMean), limits x̿ ± L·σ̂/√n.
	MeanLCL, MeanUCL float64
	// s chart: centre c4(n)·σ̂, limits B5(n)·σ̂ and B6(n)·σ̂
	// (equal to B3·c4·σ̂ and B4·c4·σ̂).
	SDCenter, SDLCL, SDUCL float64
	MeanOut, SDOut         bool     // beyond a limit
	Signals                []string // X̄ chart rules that this point completes (Rule… constants)
}

// ControlChart is a Shewhart X̄–S chart over subgroups in time order.
type ControlChart struct {
	Method    string
	Estimator string
	Sigmas    float64
	// GrandMean x̿ = Σ n_i·x̄_i / Σ n_i (the mean of all observations).
	GrandMean float64
	// PooledSD s_p with PooledDOF ν = Σ(n_i − 1).
	PooledSD  float64
	PooledDOF int
	// SigmaHat σ̂, the within-subgroup σ estimate the limits use.
	SigmaHat float64
	Points   []ControlPoint
}

// XbarS builds a Shewhart X̄–S chart (phase I: trial limits from the
// subgroups themselves, nothing excluded) for subgroups of possibly unequal
// size, each a lot's results in time order:
//
//	x̄_i = mean of subgroup i,  s_i its SD (n_i − 1),  x̿ = Σ n_i x̄_i / Σ n_i
//	σ̂ from opt.Estimator (SigmaPooled: s_p/c4(ν+1))
//	X̄ chart:  x̿ ± L·σ̂/√n_i                   (= x̿ ± A3(n_i)·c4(n_i)·σ̂)
//	s chart:  centre c4(n_i)·σ̂, limits B5(n_i)·σ̂, B6(n_i)·σ̂
//
// (chart form and c4, B5, B6: Montgomery, Introduction to Statistical
// Quality Control, §6.3.1, from memory; a limit for each subgroup's own n as
// in his §6.3.2; the pooled σ̂ is our derivation, see SigmaPooled).
// A subgroup of one value has an X̄ point but no s point. A point beyond a
// limit is flagged (MeanOut, SDOut) and, unless NoRunRules, the X̄ points
// completing a Western Electric run rule carry it in Signals.
// Errors: fewer than two subgroups or no degrees of freedom for σ̂
// (ErrTooFewPoints); an empty subgroup or a non-finite value (ErrBadInput).
// σ̂ = 0 (every subgroup constant) gives zero-width limits and no flags.
func XbarS(groups [][]float64, opt ControlOptions) (ControlChart, error) {
	L := opt.Sigmas
	if L == 0 {
		L = 3
	}
	if !(L > 0) || math.IsInf(L, 0) {
		return ControlChart{}, fmt.Errorf("fit: control limits at %v σ: %w", L, ErrBadInput)
	}
	if len(groups) < 2 {
		return ControlChart{}, fmt.Errorf("fit: a control chart needs at least 2 subgroups, have %d: %w", len(groups), ErrTooFewPoints)
	}
	cc := ControlChart{Method: ControlChartMethod, Estimator: opt.Estimator.String(), Sigmas: L, Points: make([]ControlPoint, len(groups))}
	total, sum, ss := 0, 0.0, 0.0
	meanS, nS := 0.0, 0
	for i, g := range groups {
		if len(g) == 0 {
			return ControlChart{}, fmt.Errorf("fit: control chart subgroup %d is empty: %w", i, ErrBadInput)
		}
		if j := firstNonFinite(g); j >= 0 {
			return ControlChart{}, fmt.Errorf("fit: control chart subgroup %d value %d is %v: %w", i, j, g[j], ErrBadInput)
		}
		p := &cc.Points[i]
		p.N = len(g)
		p.Mean, p.SD = meanSD(g)
		p.HasSD = p.N >= 2
		total += p.N
		sum += p.Mean * float64(p.N)
		if p.HasSD {
			ss += float64(p.N-1) * p.SD * p.SD
			cc.PooledDOF += p.N - 1
			meanS += p.SD / C4(p.N)
			nS++
		}
	}
	if cc.PooledDOF == 0 {
		return ControlChart{}, fmt.Errorf("fit: no subgroup has two or more values, so the within-lot SD is unknown: %w", ErrTooFewPoints)
	}
	cc.GrandMean = sum / float64(total)
	cc.PooledSD = math.Sqrt(ss / float64(cc.PooledDOF))
	switch opt.Estimator {
	case SigmaPooled:
		cc.SigmaHat = cc.PooledSD / C4(cc.PooledDOF+1)
	case SigmaMeanS:
		cc.SigmaHat = meanS / float64(nS)
	default:
		return ControlChart{}, fmt.Errorf("fit: unknown σ estimator %d: %w", int(opt.Estimator), ErrBadInput)
	}
	z := make([]float64, len(groups)) // standardised X̄ points
	for i := range cc.Points {
		p := &cc.Points[i]
		se := cc.SigmaHat / math.Sqrt(float64(p.N))
		p.MeanLCL, p.MeanUCL = cc.GrandMean-L*se, cc.GrandMean+L*se
		if se > 0 {
			z[i] = (p.Mean - cc.GrandMean) / se
			p.MeanOut = math.Abs(z[i]) > L
		}
		if p.HasSD {
			f := Factors(p.N, L)
			p.SDCenter = f.C4 * cc.SigmaHat
			p.SDLCL, p.SDUCL = f.B5*cc.SigmaHat, f.B6*cc.SigmaHat
			p.SDOut = cc.SigmaHat > 0 && (p.SD > p.SDUCL || p.SD < p.SDLCL)
		}
		if p.MeanOut {
			p.Signals = append(p.Signals, RuleBeyondLimits)
		}
	}
	if !opt.NoRunRules && cc.SigmaHat > 0 {
		for i := range cc.Points {
			cc.Points[i].Signals = append(cc.Points[i].Signals, runRules(z, i)...)
		}
	}
	return cc, nil
}

// runRules returns the Western Electric rules 2–4 that the point i
// completes, looking back over the standardised points z (in σ/√n units).
func runRules(z []float64, i int) []string {
	var out []string
	count := func(k int, beyond float64, sign float64) int {
		c := 0
		for j := max(0, i-k+1); j <= i; j++ {
			if sign*z[j] > beyond {
				c++
			}
		}
		return c
	}
	for _, sign := range []float64{1, -1} {
		if sign*z[i] <= 0 {
			continue // the completing point lies on the rule's side
		}
		if sign*z[i] > 2 && count(3, 2, sign) >= 2 {
			out = append(out, RuleTwoOfThree)
		}
		if sign*z[i] > 1 && count(5, 1, sign) >= 4 {
			out = append(out, RuleFourOfFive)
		}
		if i >= 7 && count(8, 0, sign) == 8 {
			out = append(out, RuleEightOneSide)
		}
	}
	return out
}

// Side says which side of a population a one-sided tolerance bound limits.
type Side int

const (
	// Lower: x̄ − k·s, for a minimum specification (a ratio in dB ≥ limit).
	Lower Side = iota
	// Upper: x̄ + k·s, for a maximum specification (a coefficient in µV/V ≤ limit).
	Upper
)

func (s Side) String() string {
	if s == Upper {
		return "upper"
	}
	return "lower"
}

// ToleranceBound is a one-sided normal tolerance bound.
type ToleranceBound struct {
	Side       Side
	Coverage   float64 // proportion P of the population on the good side
	Confidence float64 // γ
	K          float64
	Bound      float64
}

// OneSidedTolerance returns the bound x̄ − k·s (Lower) or x̄ + k·s (Upper)
// below (above) which at most 1 − coverage of a normal population lies,
// with the given confidence, k from ToleranceFactorLower (Owen 1963, the
// non-central t). coverage and confidence 0 mean 0.95. n < 2 returns
// ErrTooFewPoints; a non-finite mean or SD, or a negative SD, ErrBadInput.
func OneSidedTolerance(mean, sd float64, n int, side Side, coverage, confidence float64) (ToleranceBound, error) {
	if coverage == 0 {
		coverage = 0.95
	}
	if confidence == 0 {
		confidence = 0.95
	}
	if n < 2 {
		return ToleranceBound{}, fmt.Errorf("fit: a tolerance bound needs at least 2 results, have %d: %w", n, ErrTooFewPoints)
	}
	if math.IsNaN(mean) || math.IsInf(mean, 0) || !(sd >= 0) || math.IsInf(sd, 0) {
		return ToleranceBound{}, fmt.Errorf("fit: tolerance bound of mean %v, SD %v: %w", mean, sd, ErrBadInput)
	}
	if !(coverage > 0 && coverage < 1) || !(confidence > 0 && confidence < 1) {
		return ToleranceBound{}, fmt.Errorf("fit: tolerance coverage %v / confidence %v must be in (0, 1): %w", coverage, confidence, ErrBadInput)
	}
	k := ToleranceFactorLower(n, coverage, confidence)
	b := ToleranceBound{Side: side, Coverage: coverage, Confidence: confidence, K: k, Bound: mean - k*sd}
	if side == Upper {
		b.Bound = mean + k*sd
	}
	return b, nil
}
