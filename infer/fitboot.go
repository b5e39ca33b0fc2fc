package infer

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"

	"edgewise/likelihood"
	"edgewise/models"

	"gonum.org/v1/gonum/stat"
)

// BootOptions configures BootstrapFit.
type BootOptions struct {
	Replicates int    // number of simulated data sets (at least 20)
	Seed       uint64 // replicate i is simulated with a seed derived from Seed and i
	Workers    int    // goroutines (default GOMAXPROCS); the result does not depend on it
	Level      float64
	Context    context.Context
	Progress   func(done, total int)
}

// BootInterval is the parametric-bootstrap distribution of one quantity.
type BootInterval struct {
	Name   string
	Value  float64 // the estimate on the records
	SD     float64 // standard deviation over the replicates
	Lo, Hi float64 // percentile interval at the level
	N      int     // replicates with a finite value
}

// BootResult is the outcome of BootstrapFit.
type BootResult struct {
	Replicates int
	Failed     int // replicates whose simulation or fit failed
	Level      float64
	Params     []BootInterval // in the order of FitResult.Free
	Derived    []BootInterval // sigma, F, J, cycle affinities, currents, gaps (DerivedQuantities' rows)
	Seed       uint64
}

// BootstrapFit is the parametric bootstrap of a fit: B data sets are
// simulated from the fitted model through the same instrument, with the
// records' structure (the same number of records and of events in each,
// each record started in the stationary law), each is refitted from the
// fitted values (one start, no profiles), and the percentile intervals of
// every free parameter and every derived quantity are read off the B
// refits (Efron and Tibshirani, An Introduction to the Bootstrap (1993),
// ch. 13). Replicates whose fit fails are counted and left out. Seeds:
// replicate i uses PCG(Seed, i), so any number of workers gives the same
// result.
func BootstrapFit(res *FitResult, d *likelihood.Data, o BootOptions) (*BootResult, error) {
	if o.Replicates < 20 {
		return nil, fmt.Errorf("bootstrap: %d replicates; at least 20 are needed for a 95%% percentile interval", o.Replicates)
	}
	if o.Level == 0 {
		o.Level = res.Level
	}
	if o.Context == nil {
		o.Context = context.Background()
	}
	if o.Workers <= 0 {
		o.Workers = res.Options.Workers
	}
	in := res.Options.Likelihood.Instrument
	fitted := modelAt(res.Model, res.Free, res.X)
	net, err := fitted.Network(fitted.Start())
	if err != nil {
		return nil, fmt.Errorf("bootstrap: %w", err)
	}
	base, err := derivedValues(net, in)
	if err != nil {
		return nil, fmt.Errorf("bootstrap: %w", err)
	}
	lengths := make([]int, len(d.Records))
	for i, r := range d.Records {
		lengths[i] = r.Len()
	}
	type rep struct {
		x   []float64
		der derivedSet
		ok  bool
	}
	reps := make([]rep, o.Replicates)
	prog := newProgress(func(_ string, k, total int) {
		if o.Progress != nil {
			o.Progress(k, total)
		}
	})
	parallel(o.Replicates, o.Workers, func(i int) {
		defer prog.step("bootstrap", o.Replicates)
		if o.Context.Err() != nil {
			return
		}
		sim, err := SimulateLike(net, d.Labels, lengths, in, o.Seed, uint64(i))
		if err != nil {
			return
		}
		fo := res.Options
		fo.Starts, fo.Workers, fo.Profile, fo.Progress = 1, 1, false, nil
		fo.Context = o.Context
		f, err := Fit(fitted, sim, fo)
		if err != nil || f.Interrupted {
			return
		}
		n2, err := f.Model.Network(f.X)
		if err != nil {
			return
		}
		der, err := derivedValues(n2, in)
		if err != nil {
			return
		}
		reps[i] = rep{x: f.X, der: der, ok: true}
	})
	if o.Context.Err() != nil {
		return nil, errors.New("bootstrap: interrupted")
	}
	br := &BootResult{Replicates: o.Replicates, Level: o.Level, Seed: o.Seed}
	for _, r := range reps {
		if !r.ok {
			br.Failed++
		}
	}
	a := (1 - o.Level) / 2
	summarise := func(name string, value float64, get func(rep) (float64, bool)) BootInterval {
		var v []float64
		for _, r := range reps {
			if !r.ok {
				continue
			}
			if x, ok := get(r); ok && !math.IsNaN(x) && !math.IsInf(x, 0) {
				v = append(v, x)
			}
		}
		bi := BootInterval{Name: name, Value: value, N: len(v), SD: math.NaN(), Lo: math.NaN(), Hi: math.NaN()}
		if len(v) >= 2 {
			slices.Sort(v)
			bi.SD = stat.StdDev(v, nil)
			bi.Lo = stat.Quantile(a, stat.Empirical, v, nil)
			bi.Hi = stat.Quantile(1-a, stat.Empirical, v, nil)
		}
		return bi
	}
	for j, name := range res.Free {
		br.Params = append(br.Params, summarise(name, res.X[j], func(r rep) (float64, bool) { return r.x[j], true }))
	}
	for _, name := range base.names {
		br.Derived = append(br.Derived, summarise(name, base.vals[name], func(r rep) (float64, bool) {
			v, ok := r.der.vals[name]
			return v, ok
		}))
	}
	return br, nil
}

// derivedSet holds derived values by name, in a fixed order.
type derivedSet struct {
	names []string
	vals  map[string]float64
}

// derivedValues returns the values of the rows that DerivedQuantities
// reports, by name.
func derivedValues(net *models.Network, in likelihood.Instrument) (derivedSet, error) {
	s, err := likelihood.Sensitivity(net, in)
	if err != nil {
		return derivedSet{}, err
	}
	out := derivedSet{vals: map[string]float64{}}
	for _, kind := range derivedKinds {
		for q, row := range s.Rows {
			if row.Kind == kind {
				out.names = append(out.names, row.Name)
				out.vals[row.Name] = s.Value[q]
			}
		}
	}
	return out, nil
}

// modelAt returns a copy of m whose free parameters start at x.
func modelAt(m *models.Model, free []string, x []float64) *models.Model {
	mm := *m
	mm.Params = append([]models.Param(nil), m.Params...)
	for i := range mm.Params {
		for j, n := range free {
			if mm.Params[i].Name == n {
				mm.Params[i].Value = x[j]
			}
		}
	}
	return &mm
}

// SimulateLike simulates records from net with the given record lengths
// (events per record; records of fewer than 2 events are kept as they
// are asked), each started in the stationary law, through the instrument
// in, with the random stream PCG(seed, stream): the same arguments give
// the same data.
func SimulateLike(net *models.Network, labels []string, lengths []int, in likelihood.Instrument, seed, stream uint64) (*likelihood.Data, error) {
	sim, err := models.NewSimulator(net, seed^(stream*0x9e3779b97f4a7c15+0x632be59bd9b4e019))
	if err != nil {
		return nil, err
	}
	if in.DeadTime > 0 {
		if err := sim.SetDeadTime(in.DeadTime); err != nil {
			return nil, err
		}
	}
	if in.Frame > 0 {
		if err := sim.SetFrame(in.Frame); err != nil {
			return nil, err
		}
	}
	d := &likelihood.Data{}
	for _, l := range net.Labels {
		d.Labels = append(d.Labels, l.Name)
	}
	buf := make([]models.Event, 0, 4096)
	for r, n := range lengths {
		sim.StartStationary()
		rec := likelihood.Record{ID: strconv.Itoa(r + 1), End: math.NaN(), Time: make([]float64, 0, n), Label: make([]uint8, 0, n)}
		for left := n; left > 0; {
			k := min(left, 4096)
			buf, _ = sim.Visible(k, buf[:0])
			if err := sim.Err(); err != nil {
				return nil, err
			}
			left -= k
			for _, e := range buf {
				rec.Time = append(rec.Time, e.Time)
				rec.Label = append(rec.Label, uint8(e.Label))
			}
		}
		d.Records = append(d.Records, rec)
	}
	if len(lengths) == 1 {
		d.Records[0].ID = ""
	}
	return d, nil
}
