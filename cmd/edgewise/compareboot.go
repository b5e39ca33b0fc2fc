package main

import (
	"fmt"
	"io"
	"math"
	"slices"

	"edgewise/cmd/edgewise/internal/output"
	"edgewise/infer"
)

// bootView is the parametric bootstrap as the report shows it: the table,
// or a note saying why there is none.
type bootView struct {
	Best, Second string
	Observed     float64
	B            int
	Used, Failed int
	Exceed       int
	P            float64
	FirstError   string
	Note         string // set when no bootstrap was made: why
}

// addTo adds the bootstrap's table and notes to r.
func (b *bootView) addTo(r *output.Report) {
	if b.Note != "" {
		r.Note("%s", b.Note)
		return
	}
	t := output.NewTable("bootstrap", "Parametric bootstrap of the likelihood ratio of the two best candidates", "pair",
		output.Col("LR", "2 ln LR", ""), output.Col("replicates", "replicates", ""), output.Col("failed", "failed", ""),
		output.Col("exceed", "LR_b ≥ LR", ""), output.Col("p", "p", ""))
	t.Add(output.Key(b.Best+"_vs_"+b.Second), b.Best+" against "+b.Second, output.Num(b.Observed), output.Count(b.B), output.Count(b.Failed), output.Count(b.Exceed), output.P(b.P))
	t.Note("2 ln LR = 2 (ln L of %s - ln L of %s); replicates simulated from %s at its maximum-likelihood values with the records' structure (as many records, each with the same number of events, from the stationary law, through the instrument), both refitted to each; p = (1 + #{LR_b ≥ LR}) / (1 + B), B the replicates whose two fits succeeded; replicate b drew from the seed and b alone", b.Best, b.Second, b.Second)
	if b.Failed > 0 {
		t.Note("%d replicate(s) failed and are left out, the first: %s", b.Failed, b.FirstError)
	}
	r.Add(t)
}

// bootPairOf returns the two best fitted candidates of a view, best
// first, and the observed 2 ln LR; ok is false with fewer than two.
func bootPairOf(v *cmpView) (best, second *rankedCand, obs float64, ok bool) {
	for i := range v.Ranked {
		c := &v.Ranked[i]
		if c.Status != candFitted {
			continue
		}
		if best == nil {
			best = c
			continue
		}
		second = c
		return best, second, 2 * (float64(best.LogLik) - float64(second.LogLik)), true
	}
	return nil, nil, math.NaN(), false
}

// joinBootstrap checks the bootstrap parts against the view (the same
// pair and observed statistic, every replicate once) and computes the
// p-value.
func joinBootstrap(v *cmpView, parts []*comparePart) (*bootView, error) {
	best, second, obs, ok := bootPairOf(v)
	if !ok {
		return nil, fmt.Errorf("bootstrap parts given, but fewer than two candidates were fitted")
	}
	B := parts[0].Setup.Bootstrap
	lr := make([]float64, B)
	seen := make([]bool, B)
	bv := &bootView{Best: best.Name, Second: second.Name, Observed: obs, B: B}
	for _, p := range parts {
		bp := p.Boot
		switch {
		case p.Setup.Bootstrap != B:
			return nil, fmt.Errorf("bootstrap parts of different sizes: %s has %d replicates, %s %d", parts[0].path, B, p.path, p.Setup.Bootstrap)
		case bp.Interrupted:
			return nil, fmt.Errorf("%s: bootstrap shard %d/%d was interrupted: run it again", p.path, p.Shard, p.Of)
		case bp.Best != best.Name || bp.Second != second.Name || float64(bp.Observed) != obs:
			return nil, fmt.Errorf("%s: bootstrap of %s against %s (2 ln LR %g), but the candidate parts rank %s and %s first (2 ln LR %g): it was run from other candidate parts", p.path, bp.Best, bp.Second, float64(bp.Observed), best.Name, second.Name, obs)
		case len(bp.LR) != len(bp.Index) || len(bp.Errors) != len(bp.Index):
			return nil, fmt.Errorf("%s: malformed bootstrap part", p.path)
		}
		for i, b := range bp.Index {
			if b < 0 || b >= B || b%p.Of != p.Shard-1 || seen[b] {
				return nil, fmt.Errorf("%s: replicate %d does not belong to bootstrap shard %d/%d", p.path, b, p.Shard, p.Of)
			}
			seen[b], lr[b] = true, float64(bp.LR[i])
			if bp.Errors[i] != "" && bv.FirstError == "" {
				bv.FirstError = bp.Errors[i]
			}
		}
	}
	if i := slices.Index(seen, false); i >= 0 {
		return nil, fmt.Errorf("bootstrap replicate %d is missing from the parts", i)
	}
	bv.P, bv.Exceed, bv.Used, bv.Failed = infer.BootstrapPValue(obs, lr)
	return bv, nil
}

// runBootstrap runs the shard's share of the bootstrap replicates for the
// two best candidates of v and returns them as a part; with fewer than
// two fitted candidates it returns nil and why.
func runBootstrap(c *command, v *cmpView, p *comparePrep, shard infer.Shard) (*comparePart, string, error) {
	best, second, obs, ok := bootPairOf(v)
	if !ok {
		return nil, fmt.Sprintf("the bootstrap (%d replicates) was not run: it needs two fitted candidates", p.setup.Bootstrap), nil
	}
	total := 0
	for b := range p.setup.Bootstrap {
		if shard.Selects(b) {
			total++
		}
	}
	pb := c.progress(int64(total), "bootstrap replicates", false)
	res, err := infer.ParametricBootstrap(second.model, floats(second.X), best.model, floats(best.X), obs, p.rin.d, infer.BootstrapOptions{
		Replicates: p.setup.Bootstrap, Seed: p.setup.Seed, Fit: p.opt.Fit, Shard: shard,
		Progress: func(done, total int) { pb.add(1) },
	})
	pb.finish()
	if err != nil {
		return nil, "", err
	}
	bp := &bootPart{Best: best.Name, Second: second.Name, Observed: jnum(obs), Index: res.Index, LR: jnums(res.LR), Errors: res.Errors, Interrupted: res.Interrupted}
	if bp.Index == nil {
		bp.Index, bp.LR, bp.Errors = []int{}, []jnum{}, []string{}
	}
	return &comparePart{Format: partFormat, Kind: partBootstrap, Shard: shard.Index + 1, Of: max(1, shard.Of), Setup: p.setup, Boot: bp, path: "this run"}, "", nil
}

// bootstrapShard is compare --shard i/N --bootstrap B --fits PARTS: it
// joins the candidate parts, checks that they belong to this comparison,
// and writes the shard's bootstrap replicates as a part.
func bootstrapShard(c *command, files *output.Files, p *comparePrep) int {
	parts, err := readParts(p.fits)
	if err != nil {
		return c.fail(1, fmt.Errorf("--fits: %w", err))
	}
	for _, q := range parts {
		if q.Kind != partCandidates {
			return c.fail(1, fmt.Errorf("--fits: %s is a %s part: give the candidate parts", q.path, q.Kind))
		}
		if d := sameSetup(&p.setup, &q.Setup); d != "" {
			return c.fail(1, fmt.Errorf("--fits: %s does not belong to this comparison: %s", q.path, d))
		}
	}
	_, v, err := assemble(parts, false)
	if err != nil {
		return c.fail(1, fmt.Errorf("--fits: %w", err))
	}
	part, why, err := runBootstrap(c, v, p, p.shard)
	switch {
	case err != nil:
		return c.fail(1, err)
	case part == nil:
		return c.fail(1, fmt.Errorf("%s", why))
	}
	if err := files.Write(*c.out, func(w io.Writer) error { return writePart(w, part) }); err != nil {
		return c.fail(1, err)
	}
	return 0
}
