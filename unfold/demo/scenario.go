package demo

import (
	"math"
	"math/rand/v2"
)

// The fictional scenario: a made-up particle, the "zeton", produced in
// the collisions of an imaginary machine (the "demo run") and measured
// double-differentially in its transverse momentum pt (GeV) and absolute
// rapidity |y|. Every number below is invented; none comes from a real
// experiment.
//
// Generator level (both the simulation and the pseudo-data):
//
//	pt  ~ power law (pt/ptMin)^-n on [ptMin, ∞)
//	|y| ~ 1 − |y|²/c² on [0, yMax), the sign of y uniformly random
//
// with a softer spectrum in the simulation (n = simSlope, c = simYWidth)
// than in the pseudo-data (n = dataSlope, c = dataYWidth). The fiducial
// (truth-level) selection is |y_true| < yFiducial.
//
// Detector: an efficiency that is below one everywhere, turns on above
// ptMin and falls at large |y|; a momentum resolution
// σ(pt)/pt = resA ⊕ resB·pt with a scale offset ptScale; a small
// rapidity resolution σ_y; the reco-level acceptance |y_reco| < yFiducial.
// Fakes: reconstructed zeton candidates with no generated zeton, from a
// background-like source falling exponentially in pt and flat in |y|.
const (
	ptMin     = 15.0 // GeV, lower end of the generated spectrum
	yMax      = 3.0  // generated |y| range
	yFiducial = 2.5  // truth and reco acceptance in |y|

	simSlope   = 4.0 // power-law index of the simulation's pt spectrum
	dataSlope  = 3.8 // the pseudo-data's, harder
	genSlope   = 3.2 // the simulation is generated harder and reweighted to simSlope
	simYWidth  = 4.5 // c of the simulation's |y| shape
	dataYWidth = 3.8 // c of the pseudo-data's |y| shape, falling faster

	effPlateau = 0.93 // efficiency at high pt and y = 0
	effYDrop   = 0.35 // relative efficiency loss at |y| = yFiducial (quadratic in |y|)
	effTurnOn  = 0.45 // relative efficiency loss at pt = ptMin (exponential turn-on)
	effTurnPt  = 10.0 // GeV, turn-on length

	resA    = 0.03   // constant term of σ(pt)/pt
	resB    = 0.0004 // 1/GeV, term of σ(pt)/pt growing with pt
	ptScale = 0.985  // mean reco/true momentum ratio
	resY    = 0.03   // rapidity resolution

	fakePtMin  = 12.0 // GeV, lower end of the fakes' reco pt
	fakePtMean = 10.0 // GeV, mean of their exponential excess above fakePtMin

	// Normalisations, in expected events of the pseudo-data per
	// simulated event (so that --events scales everything).
	dataPerSim      = 1.0 / 6 // expected generated zetons in the pseudo-data
	fakesPerSignal  = 0.03    // expected fakes relative to the generated zetons, both samples
	simNormalRatio  = 1.1     // the simulation's cross-section over the pseudo-data's
	simFakeFraction = 0.05    // fraction of the simulated events that are fakes

	// noValue fills the truth columns of a fake and the reco columns of
	// an event that was not reconstructed (common practice in event
	// files: a value no selection can pass).
	noValue = -999.0
)

// model is one generator-level truth: the power-law index of pt and the
// width parameter of |y|.
type model struct {
	slope  float64
	yWidth float64
}

var (
	simModel  = model{slope: simSlope, yWidth: simYWidth}
	dataModel = model{slope: dataSlope, yWidth: dataYWidth}
	genModel  = model{slope: genSlope, yWidth: simYWidth}
)

// ptTail is the probability that pt ≥ x: (x/ptMin)^-(n−1) above ptMin.
func (m model) ptTail(x float64) float64 {
	if x <= ptMin {
		return 1
	}
	if math.IsInf(x, 1) {
		return 0
	}
	return math.Pow(x/ptMin, -(m.slope - 1))
}

// ptDensity is the normalised probability density of pt.
func (m model) ptDensity(pt float64) float64 {
	if pt < ptMin {
		return 0
	}
	return (m.slope - 1) / ptMin * math.Pow(pt/ptMin, -m.slope)
}

// yCDF is the probability that |y| < a.
func (m model) yCDF(a float64) float64 {
	a = math.Max(0, math.Min(a, yMax))
	c2 := m.yWidth * m.yWidth
	return (a - a*a*a/(3*c2)) / (yMax - yMax*yMax*yMax/(3*c2))
}

// drawPt draws pt by inversion of the power-law tail.
func (m model) drawPt(rng *rand.Rand) float64 {
	u := 1 - rng.Float64() // (0, 1]
	return ptMin * math.Pow(u, -1/(m.slope-1))
}

// drawAbsY draws |y| by rejection from the uniform density on [0, yMax);
// the shape is at least 1 − yMax²/c² > 0.3 of its maximum, so few draws
// are rejected.
func (m model) drawAbsY(rng *rand.Rand) float64 {
	c2 := m.yWidth * m.yWidth
	for {
		a := yMax * rng.Float64()
		if rng.Float64() < 1-a*a/c2 {
			return a
		}
	}
}

// fraction is the probability of a generated zeton to fall in the
// rectangle [ptLo, ptHi) × [yLo, yHi) of (pt, |y|), clipped to the
// fiducial region; infinite edges are allowed.
func (m model) fraction(ptLo, ptHi, yLo, yHi float64) float64 {
	yLo = math.Max(yLo, 0)
	yHi = math.Min(yHi, yFiducial)
	if yHi <= yLo || ptHi <= ptLo {
		return 0
	}
	return (m.ptTail(ptLo) - m.ptTail(ptHi)) * (m.yCDF(yHi) - m.yCDF(yLo))
}

// efficiency is the probability that a zeton with true pt and |y| is
// reconstructed.
func efficiency(pt, absY float64) float64 {
	r := absY / yFiducial
	return effPlateau * (1 - effYDrop*r*r) * (1 - effTurnOn*math.Exp(-(pt-ptMin)/effTurnPt))
}

// ptResolution is σ(pt)/pt.
func ptResolution(pt float64) float64 {
	return math.Hypot(resA, resB*pt)
}

// event is one generated event: truth and reco values, a weight and the
// two selection flags.
type event struct {
	ptTrue, yTrue, ptReco, yReco float64
	weight                       float64
	passTruth, passReco          bool
}

// round32 rounds to float32 precision, so that the float32 branches of
// the ROOT files and the float64 columns of the Parquet files hold the
// same values.
func round32(x float64) float64 { return float64(float32(x)) }

// zeton generates one zeton with the given generator model and applies
// the detector.
func zeton(rng *rand.Rand, m model) event {
	pt := m.drawPt(rng)
	a := m.drawAbsY(rng)
	y := a
	if rng.Uint64()&1 == 1 {
		y = -a
	}
	e := event{ptTrue: round32(pt), yTrue: round32(y), ptReco: noValue, yReco: noValue, weight: 1}
	e.passTruth = math.Abs(e.yTrue) < yFiducial
	if rng.Float64() < efficiency(pt, a) {
		ptr := pt * (ptScale + ptResolution(pt)*rng.NormFloat64())
		yr := y + resY*rng.NormFloat64()
		if math.Abs(yr) < yFiducial && ptr > 0 {
			e.ptReco, e.yReco = round32(ptr), round32(yr)
			e.passReco = math.Abs(e.yReco) < yFiducial
		}
	}
	return e
}

// fake generates one reco-level candidate without a generated zeton.
func fake(rng *rand.Rand) event {
	pt := fakePtMin + fakePtMean*rng.ExpFloat64()
	y := yFiducial * rng.Float64()
	if rng.Uint64()&1 == 1 {
		y = -y
	}
	e := event{ptTrue: noValue, yTrue: noValue, ptReco: round32(pt), yReco: round32(y), weight: 1}
	e.passReco = math.Abs(e.yReco) < yFiducial
	return e
}
