package infer

import (
	"bytes"
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat/distuv"
)

// fittedModel returns m with every free parameter's value replaced by the
// fitted one, written as a spec (models.Model.Write) and parsed back, as
// `edgewise fit --out` and `edgewise simulate` do.
func fittedModel(t *testing.T, m *models.Model, res *FitResult) *models.Model {
	t.Helper()
	mm := *m
	mm.Params = append([]models.Param(nil), m.Params...)
	k := 0
	for i := range mm.Params {
		if !mm.Params[i].Fixed {
			mm.Params[i].Value = res.X[k]
			k++
		}
	}
	var buf bytes.Buffer
	if err := mm.Write(&buf); err != nil {
		t.Fatal(err)
	}
	out, err := models.Parse(&buf, "fitted.toml")
	if err != nil {
		t.Fatalf("the fitted spec does not parse: %v\n%s", err, buf.String())
	}
	got := out.Start()
	for j := range got {
		if got[j] != res.X[j] {
			t.Fatalf("%s: written %v, read back %v", res.Free[j], res.X[j], got[j])
		}
	}
	return out
}

// TestFitRoundTrip: fit -> write the fitted model as a spec -> simulate
// from it -> fit again. The second data set's truth is the first fit, so
//   - every first-fit rate lies in the second fit's profile interval, and
//     every second-fit rate in the first fit's (level 99.9%: each check
//     fails by chance with probability 0.1%, 1.2% for all twelve);
//   - the likelihood-ratio statistic of the first fit's values on the
//     second data, 2 [ln L2(x2) - ln L2(x1)], is below the chi-square(6)
//     99.9% quantile (Wilks's theorem, Ann. Math. Stat. 9, 60 (1938)).
func TestFitRoundTrip(t *testing.T) {
	if testing.Short() {
		t.Skip("skipped with -short")
	}
	const level = 0.999
	m := parseSpec(t, fitRing3Spec)
	d1 := truthData(t, m, 41, 1, 5000)
	r1, err := Fit(m, d1, FitOptions{Starts: 3, Seed: 1, Workers: 2, Profile: true, Level: level})
	if err != nil {
		t.Fatal(err)
	}
	fm := fittedModel(t, m, r1)
	d2 := truthData(t, fm, 42, 1, 5000)
	r2, err := Fit(fm, d2, FitOptions{Starts: 3, Seed: 2, Workers: 2, Profile: true, Level: level})
	if err != nil {
		t.Fatal(err)
	}
	for j := range r1.Params {
		p1, p2 := r1.Params[j], r2.Params[j]
		if p1.Profile == nil || p2.Profile == nil {
			t.Fatalf("%s: no profile interval (%v, %v)", p1.Name, p1.Profile, p2.Profile)
		}
		t.Logf("%s: first fit %.4g [%.4g, %.4g], refit %.4g [%.4g, %.4g] (%.1f%% profile)", p1.Name,
			p1.Value, p1.Profile.Lower, p1.Profile.Upper, p2.Value, p2.Profile.Lower, p2.Profile.Upper, 100*level)
		if !(p2.Profile.Lower <= p1.Value && p1.Value <= p2.Profile.Upper) {
			t.Errorf("%s: first-fit value %.4g outside the refit's interval [%.4g, %.4g]", p1.Name, p1.Value, p2.Profile.Lower, p2.Profile.Upper)
		}
		if !(p1.Profile.Lower <= p2.Value && p2.Value <= p1.Profile.Upper) {
			t.Errorf("%s: refit value %.4g outside the first fit's interval [%.4g, %.4g]", p1.Name, p2.Value, p1.Profile.Lower, p1.Profile.Upper)
		}
	}
	ll21, err := likelihood.ModelLogLik(fm, r1.X, d2, likelihood.Options{})
	if err != nil {
		t.Fatal(err)
	}
	lr := 2 * (r2.LogLik - ll21)
	q := distuv.ChiSquared{K: float64(len(r1.X))}.Quantile(level)
	t.Logf("likelihood ratio of the first fit on the refit's data: %.3f (chi-square(%d) %.1f%% quantile %.2f)", lr, len(r1.X), 100*level, q)
	if lr < -1e-6 || lr > q {
		t.Errorf("likelihood ratio %.4f outside [0, %.2f]", lr, q)
	}
}

// runWithin runs f and fails the test when it has not returned after
// limit: a guard against a hang, not a speed measurement.
func runWithin[T any](t *testing.T, limit time.Duration, f func() T) T {
	t.Helper()
	ch := make(chan T, 1)
	go func() { ch <- f() }()
	select {
	case v := <-ch:
		return v
	case <-time.After(limit):
		t.Fatalf("did not return within %v of the cancellation", limit)
	}
	var zero T
	return zero
}

type fitOut struct {
	res *FitResult
	err error
}

// TestFitInterrupt: a cancelled FitOptions.Context stops a fit at every
// stage; the fit returns (never hangs), with the best optimum found so far
// marked Interrupted, or with an error saying that no start finished.
func TestFitInterrupt(t *testing.T) {
	m := parseSpec(t, fitRing3Spec)
	d := truthData(t, m, 51, 1, 3000)
	const limit = 2 * time.Minute

	t.Run("before any start", func(t *testing.T) {
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		o := runWithin(t, limit, func() fitOut {
			r, err := Fit(m, d, FitOptions{Starts: 4, Workers: 2, Context: ctx})
			return fitOut{r, err}
		})
		if o.err == nil {
			t.Fatalf("no error and result interrupted=%v: a cancelled fit before any start must say so", o.res.Interrupted)
		}
		if !strings.Contains(o.err.Error(), "interrupted") {
			t.Errorf("error %q does not say the fit was interrupted", o.err)
		}
	})

	// The same fit, not interrupted: an interrupted fit may report fewer
	// profile intervals, never different ones.
	full, err := Fit(m, d, FitOptions{Starts: 4, Seed: 3, Workers: 1, Profile: true})
	if err != nil {
		t.Fatal(err)
	}

	// Cancelled at the first unit of work of each stage (the profile after
	// its 4th side: with one worker the sides run in order, so the first
	// two parameters' intervals are complete); one worker, so the starts
	// run in order and the first one has finished.
	for _, stage := range []string{"starts", "refine", "information", "profile"} {
		t.Run("during "+stage, func(t *testing.T) {
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			at := 1
			if stage == "profile" {
				at = 4
			}
			opt := FitOptions{Starts: 4, Seed: 3, Workers: 1, Profile: true, Context: ctx,
				Progress: func(s string, done, total int) {
					if s == stage && done == at {
						cancel()
					}
				}}
			if stage == "refine" {
				opt.ExploreGaps = 1000 // an exploration subsample, so that refinement has work
			}
			o := runWithin(t, limit, func() fitOut {
				r, err := Fit(m, d, opt)
				return fitOut{r, err}
			})
			if o.err != nil {
				t.Fatalf("error %v: at least one start had finished", o.err)
			}
			r := o.res
			if ctx.Err() == nil {
				t.Fatalf("stage %q never reported progress", stage)
			}
			if !r.Interrupted {
				t.Errorf("result not marked Interrupted")
			}
			if math.IsNaN(r.LogLik) || math.IsInf(r.LogLik, 0) || len(r.X) != len(r.Free) {
				t.Fatalf("no usable best optimum: ln L %v, x %v", r.LogLik, r.X)
			}
			best := math.Inf(-1)
			for _, o := range r.Optima {
				best = math.Max(best, o.LogLik)
			}
			if r.LogLik != best {
				t.Errorf("reported ln L %v is not the best optimum found (%v)", r.LogLik, best)
			}
			if stage == "starts" && (!r.Starts[0].Converged || r.Starts[0].Optimum != 0) {
				t.Errorf("the finished first start is not the reported optimum: %+v", r.Starts[0])
			}
			// Profile intervals: those reported are the uninterrupted
			// fit's (an interrupted inner maximisation must not pass for a
			// profile crossing); after the profile's 4th side exactly the
			// first two parameters have one.
			kept := 0
			for j, p := range r.Params {
				if p.Profile == nil {
					continue
				}
				kept++
				want := full.Params[j].Profile
				if stage == "refine" || want == nil || *p.Profile != *want {
					t.Errorf("%s: interval %+v after the interruption, uninterrupted %+v", p.Name, p.Profile, want)
				}
			}
			if stage == "profile" && (kept != 2 || r.Params[0].Profile == nil || r.Params[1].Profile == nil) {
				t.Errorf("%d profile intervals kept, want those of the first two parameters", kept)
			}
			if stage == "starts" {
				for i, s := range r.Starts[1:] {
					if s.Converged {
						t.Errorf("start %d converged after the cancellation (%s)", i+2, s.Status)
					}
				}
			}
		})
	}
}
