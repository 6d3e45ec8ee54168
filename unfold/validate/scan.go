package validate

import (
	"fmt"
	"github.com/desmear/desmear/unfold"
	"math"
)

// Point is the figures of merit of one regularisation strength k over
// an ensemble of T toys, each beside its statistical precision (one
// standard deviation from the finite toy count). Slices have one entry
// per truth bin; bins the response cannot measure hold zeros.
type Point struct {
	K    int `json:"k"`
	Toys int `json:"toys"`
	// Bias is the mean estimate minus the truth; BiasError its standard
	// error sqrt(Variance/T).
	Bias      []float64 `json:"bias"`
	BiasError []float64 `json:"bias_error"`
	// Variance is the sample variance of the estimate across the toys;
	// its relative precision is VarianceRelError = sqrt(2/(T−1))
	// (Gaussian estimates).
	Variance         []float64 `json:"variance"`
	VarianceRelError float64   `json:"variance_rel_error"`
	// Sigma is the mean stated uncertainty (linearised, per toy).
	Sigma []float64 `json:"sigma"`
	// PullMean and PullWidth are the mean and standard deviation of
	// (estimate − truth)/σ over the toys with σ > 0; their precisions
	// are width/sqrt(T) and width/sqrt(2(T−1)).
	PullMean       []float64 `json:"pull_mean"`
	PullMeanError  []float64 `json:"pull_mean_error"`
	PullWidth      []float64 `json:"pull_width"`
	PullWidthError []float64 `json:"pull_width_error"`
	// Coverage is the fraction c of toys whose interval estimate ± σ
	// contains the truth; CoverageError the binomial sqrt(c(1−c)/T), and
	// CoverageExpectedError = sqrt(0.6827·0.3173/T) the spread expected
	// around an exact 68.27%.
	Coverage              []float64 `json:"coverage"`
	CoverageError         []float64 `json:"coverage_error"`
	CoverageExpectedError float64   `json:"coverage_expected_error"`
	// MSE is the mean over the toys of Σ_j (estimate − truth)² (the
	// summed bias² + variance), MSEError its standard error; MSEWeighted
	// the same with each bin weighted by 1/truth (bins with truth > 0).
	MSE              float64 `json:"mse"`
	MSEError         float64 `json:"mse_error"`
	MSEWeighted      float64 `json:"mse_weighted"`
	MSEWeightedError float64 `json:"mse_weighted_error"`
	// BiasOverSigma is the mean over the determined bins with a spread of
	// |Bias_j|/sqrt(Variance_j); each term has a precision of about
	// 1/sqrt(T), which BiasOverSigmaError states.
	BiasOverSigma      float64 `json:"bias_over_sigma"`
	BiasOverSigmaError float64 `json:"bias_over_sigma_error"`
	// CoverageMean and CoverageMin summarise Coverage over the
	// determined bins.
	CoverageMean float64 `json:"coverage_mean"`
	CoverageMin  float64 `json:"coverage_min"`
}

// oneSigma is the probability of a Gaussian within ±1σ, erf(1/√2)
// (common practice; 0.682689…).
var oneSigma = math.Erf(1 / math.Sqrt2)

// Scan returns the figures of merit for k = 1..MaxK.
func (e *Ensemble) Scan() []Point {
	T := e.Toys()
	ft := float64(T)
	nt := len(e.Truth)
	pts := make([]Point, e.MaxK)
	for k := range pts {
		a := e.total(k)
		p := Point{
			K: k + 1, Toys: T,
			Bias: make([]float64, nt), BiasError: make([]float64, nt), Variance: make([]float64, nt), Sigma: make([]float64, nt),
			PullMean: make([]float64, nt), PullMeanError: make([]float64, nt), PullWidth: make([]float64, nt), PullWidthError: make([]float64, nt),
			Coverage: make([]float64, nt), CoverageError: make([]float64, nt),
			VarianceRelError:      math.Sqrt(2 / (ft - 1)),
			CoverageExpectedError: math.Sqrt(oneSigma * (1 - oneSigma) / ft),
			MSE:                   a.SqErr.Mean[0], MSEError: a.SqErr.sd(0) / math.Sqrt(ft),
			MSEWeighted: a.SqErrW.Mean[0], MSEWeightedError: a.SqErrW.sd(0) / math.Sqrt(ft),
			BiasOverSigmaError: 1 / math.Sqrt(ft),
			CoverageMin:        1,
		}
		det, spread := 0, 0
		for j := range nt {
			if !e.Det[j] {
				continue
			}
			det++
			v := a.Estimate.variance(j)
			p.Bias[j] = a.Estimate.Mean[j] - e.Truth[j]
			p.BiasError[j] = math.Sqrt(v / ft)
			p.Variance[j] = v
			p.Sigma[j] = a.Sigma.Mean[j]
			if n := a.Pull.N[j]; n > 0 {
				w := a.Pull.sd(j)
				p.PullMean[j], p.PullWidth[j] = a.Pull.Mean[j], w
				p.PullMeanError[j] = w / math.Sqrt(n)
				if n > 1 {
					p.PullWidthError[j] = w / math.Sqrt(2*(n-1))
				}
			}
			c := float64(a.Covered[j]) / ft
			p.Coverage[j], p.CoverageError[j] = c, math.Sqrt(c*(1-c)/ft)
			p.CoverageMean += c
			p.CoverageMin = min(p.CoverageMin, c)
			if v > 0 { // bins whose estimate never varies are left out
				p.BiasOverSigma += math.Abs(p.Bias[j]) / math.Sqrt(v)
				spread++
			}
		}
		if det > 0 {
			p.CoverageMean /= float64(det)
		}
		if spread > 0 {
			p.BiasOverSigma /= float64(spread)
		}
		pts[k] = p
	}
	return pts
}

// Criterion names a rule choosing the regularisation strength from a
// scan.
type Criterion string

const (
	// MinMSE chooses the k with the smallest summed mean squared error
	// Σ_j (bias_j² + variance_j) (the default; the first such k on a
	// tie).
	MinMSE Criterion = "min_mse"
	// MinMSEWeighted chooses the k with the smallest 1/truth-weighted
	// mean squared error.
	MinMSEWeighted Criterion = "min_mse_weighted"
	// BiasBelow chooses the smallest k whose mean |bias|/σ over the bins
	// is below the threshold (σ the toys' spread); when no k qualifies,
	// the k with the smallest value, and Recommendation.Met is false.
	BiasBelow Criterion = "bias_below"
)

// Criteria lists the criteria in order.
func Criteria() []Criterion { return []Criterion{MinMSE, MinMSEWeighted, BiasBelow} }

// DefaultBiasThreshold is the threshold of BiasBelow when none is
// given: a bias of a fifth of the statistical spread.
const DefaultBiasThreshold = 0.2

// Recommendation is the regularisation strength a criterion chooses,
// with the criterion's curve (one value per k = 1..MaxK).
type Recommendation struct {
	K         int       `json:"k"`
	Criterion Criterion `json:"criterion"`
	Threshold float64   `json:"threshold,omitempty"`
	Met       bool      `json:"met"`
	Curve     []float64 `json:"curve"`
}

// Recommend applies criterion c (threshold for BiasBelow; zero means
// DefaultBiasThreshold) to the scan.
func Recommend(scan []Point, c Criterion, threshold float64) (*Recommendation, error) {
	if len(scan) == 0 {
		return nil, fmt.Errorf("validate: an empty scan")
	}
	r := &Recommendation{Criterion: c, Curve: make([]float64, len(scan)), Met: true}
	for i, p := range scan {
		switch c {
		case MinMSE:
			r.Curve[i] = p.MSE
		case MinMSEWeighted:
			r.Curve[i] = p.MSEWeighted
		case BiasBelow:
			r.Curve[i] = p.BiasOverSigma
		default:
			return nil, &unfold.SettingsError{Field: "Criterion", Reason: fmt.Sprintf("unknown criterion %q (want %s, %s or %s)", c, MinMSE, MinMSEWeighted, BiasBelow)}
		}
	}
	best := 0
	for i, v := range r.Curve {
		if v < r.Curve[best] {
			best = i
		}
	}
	if c == BiasBelow {
		if threshold == 0 {
			threshold = DefaultBiasThreshold
		}
		r.Threshold = threshold
		r.Met = false
		for i, v := range r.Curve {
			if v < threshold {
				best, r.Met = i, true
				break
			}
		}
	}
	r.K = scan[best].K
	return r, nil
}
