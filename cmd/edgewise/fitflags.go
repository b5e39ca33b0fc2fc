package main

import (
	"context"
	"fmt"
	"os"
	"os/signal"
	"syscall"

	"edgewise/infer"
	"edgewise/likelihood"
)

// fitFlags are the options that fit and compare share: the instrument,
// the start of each record, and the multi-start search.
type fitFlags struct {
	dead, frame *float64
	start       *string
	starts      *int
	seed        *uint64
	workers     *int
	explore     *int
}

func (c *command) addFitFlags(defStarts int) *fitFlags {
	return &fitFlags{
		dead:    c.fs.Float64("dead-time", 0, "instrument dead time after each recorded event (time units; default: from the records' stamp, else 0)"),
		frame:   c.fs.Float64("frame", 0, "frame length of the timestamps (time units; 0 = exact times; default: from the records' stamp)"),
		start:   c.fs.String("start", "first-event", "how each record starts: first-event (conditioned on its first event) or stationary (observed from time 0 in the stationary law)"),
		starts:  c.fs.IntP("starts", "k", defStarts, "number of starts of the search: the spec's values, a rescaled start, data-informed and random ones"),
		seed:    c.fs.Uint64P("seed", "s", 1, "seed of the random starts (and of any resampling)"),
		workers: c.fs.IntP("workers", "j", 0, "goroutines (0 = all cores); results do not depend on it"),
		explore: c.fs.Int("explore-gaps", 20000, "with more than twice this many gaps, run the starts on a subsample of about this many gaps, then refine the distinct optima on all the data (-1: never)"),
	}
}

// check validates the options that need no data.
func (f *fitFlags) check() error {
	if *f.starts < 1 || *f.starts > 1000 {
		return fmt.Errorf("--starts %d: want 1 to 1000", *f.starts)
	}
	if *f.workers < 0 {
		return fmt.Errorf("--workers %d: want 0 (all cores) or more", *f.workers)
	}
	if *f.start != "first-event" && *f.start != "stationary" {
		return fmt.Errorf("--start %q: want first-event or stationary", *f.start)
	}
	if *f.explore == 0 || *f.explore < -1 || (*f.explore > 0 && *f.explore < 1000) {
		return fmt.Errorf("--explore-gaps %d: want -1 (never) or at least 1000", *f.explore)
	}
	return (likelihood.Instrument{DeadTime: *f.dead, Frame: *f.frame}).Validate()
}

// instrument returns the instrument of the flags, completed from the
// records' stamp (simulate) where a flag was not given, with notes saying
// so.
func (f *fitFlags) instrument(c *command, in *recordsInput) (likelihood.Instrument, []string, error) {
	ins := likelihood.Instrument{DeadTime: *f.dead, Frame: *f.frame}
	var notes []string
	if v, ok := in.stamp.float("dead_time"); ok && !c.fs.Changed("dead-time") && v > 0 {
		ins.DeadTime = v
		notes = append(notes, fmt.Sprintf("dead time %g read from the records' stamp (simulate)", v))
	}
	if v, ok := in.stamp.float("frame"); ok && !c.fs.Changed("frame") && v > 0 {
		ins.Frame = v
		notes = append(notes, fmt.Sprintf("frame length %g read from the records' stamp (simulate)", v))
	}
	if err := ins.Validate(); err != nil {
		return ins, nil, fmt.Errorf("%s: instrument in the stamp: %w", in.name, err)
	}
	return ins, notes, nil
}

// options returns the library's fit options for the instrument.
func (f *fitFlags) options(ins likelihood.Instrument) infer.FitOptions {
	o := infer.FitOptions{
		Likelihood:  likelihood.Options{Instrument: ins},
		Starts:      *f.starts,
		Seed:        *f.seed,
		Workers:     *f.workers,
		ExploreGaps: *f.explore,
	}
	if *f.start == "stationary" {
		o.Likelihood.Start = likelihood.StartStationary
	}
	return o
}

// interruptible returns a context cancelled by SIGINT or SIGTERM, for
// long fits that stop cleanly and report what they have; stop restores
// the default handling (the output writer then watches the signals).
func interruptible() (context.Context, context.CancelFunc) {
	return signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
}
