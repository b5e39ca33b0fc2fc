package infer

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// This file holds the interval rules shared by the rates, the current, D
// and the entropy-production bounds: the delete-one-block jackknife with a
// Student t quantile (linear or log scale), and the rate of a count with
// the Garwood interval when there are too few blocks or events for the
// jackknife.

// minJackCount is the least number of events of a rate for its jackknife
// interval; below it the rate takes the Garwood interval (few events of a
// stationary point process are close to Poisson, and the log of a
// delete-one rate would be undefined when one block holds them all).
const minJackCount = 10

// jackSE returns the delete-one jackknife standard error
// sqrt((G-1)/G sum_g (v_g - mean)^2) of the replicates.
func jackSE(reps []float64) float64 {
	g := float64(len(reps))
	m := 0.0
	for _, r := range reps {
		m += r
	}
	m /= g
	ss := 0.0
	for _, r := range reps {
		ss += (r - m) * (r - m)
	}
	return math.Sqrt((g - 1) / g * ss)
}

// studentT returns the two-sided Student t quantile at level on df
// degrees of freedom.
func studentT(level float64, df int) float64 {
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(df)}.Quantile(0.5 + level/2)
}

// jackEstimate is v with the delete-one jackknife SE of its G replicates
// and a Student t interval on G - 1 degrees of freedom:
//
//	linear:     v +- t SE,
//	log scale:  v exp(+- t SE_log),  SE_log the jackknife SE of ln v_g,
//
// and then SE = v SE_log (delta method). With logScale, v and every
// replicate must be positive; otherwise the linear interval is used and
// the Note says so.
func jackEstimate(v float64, reps []float64, level float64, logScale bool, method string) Estimate {
	if len(reps) < 2 {
		return tooFew("too few events: fewer than two jackknife blocks")
	}
	t := studentT(level, len(reps)-1)
	e := Estimate{Value: v, Method: method}
	if logScale {
		ok := v > 0
		lr := make([]float64, len(reps))
		for i, r := range reps {
			ok = ok && r > 0
			lr[i] = math.Log(r)
		}
		if ok {
			sl := jackSE(lr)
			e.SE = v * sl
			e.Lo, e.Hi = v*math.Exp(-t*sl), v*math.Exp(t*sl)
			return e
		}
		e.Note = "a replicate is not positive: linear scale used"
		e.Method = method + " (linear, not log scale)"
	}
	e.SE = jackSE(reps)
	e.Lo, e.Hi = v-t*e.SE, v+t*e.SE
	return e
}

// garwoodRate is the rate n/duration with the Garwood interval of the
// count divided by the duration (PoissonInterval): exact when the events
// form a Poisson process, never negative and never of zero width. SE is
// the Poisson sqrt(n)/duration (NaN for n = 0, where a standard error
// says nothing).
func garwoodRate(n int, duration, level float64) Estimate {
	if !(duration > 0) {
		return nanEstimate("", "zero observed time")
	}
	lo, hi := PoissonInterval(n, level)
	e := Estimate{Value: float64(n) / duration, SE: math.Sqrt(float64(n)) / duration, Lo: lo / duration, Hi: hi / duration, Method: "Garwood (exact Poisson)"}
	if n == 0 {
		e.SE = math.NaN()
	}
	return e
}

// countRate is the rate of n events over duration with its delete-one-block
// jackknife replicates reps (log scale, jackEstimate), or the Garwood
// interval when there are fewer than minJackBlocks replicates or fewer
// than minJackCount events. The visible events of a hidden network are not
// a Poisson process (they cluster or space out), so the Garwood interval,
// exact for Poisson counts, covered 83-97% for the activity of the shipped
// models, where the jackknife covered 94-96% (coverage_test.go): it is the
// fallback for few events, and says what it assumes.
func countRate(n, duration float64, reps []float64, level float64, method string) Estimate {
	if len(reps) >= minJackBlocks && n >= minJackCount {
		return jackEstimate(n/duration, reps, level, true, method)
	}
	e := garwoodRate(int(n), duration, level)
	why := fmt.Sprintf("%d jackknife blocks", len(reps))
	if n < minJackCount {
		why = fmt.Sprintf("%g events", n)
	}
	e.Note = joinNote(e.Note, fmt.Sprintf("assumes Poisson counting: %s are too few to measure the dispersion of the counts (want %d blocks and %d events)", why, minJackBlocks, minJackCount))
	return e
}
