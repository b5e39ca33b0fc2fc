package infer

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"edgewise/likelihood"
)

// refCurrentBlocks is the direct form of currentBlocks: the windows of each
// grid duration counted on their own, one pass over the block's events per
// grid point. currentBlocks counts the finest windows once and sums them
// pairwise; the two must agree exactly (the sums are of small integers).
func refCurrentBlocks(recs []likelihood.Record, fw, bw uint8, tmax float64, grid []float64) []boundBlock {
	var blocks []boundBlock
	sign := func(l uint8) float64 {
		switch l {
		case fw:
			return 1
		case bw:
			return -1
		}
		return 0
	}
	for r := range recs {
		rec := &recs[r]
		t0, t1 := fluctSpan(rec)
		nb := max(1, int(math.Ceil((t1-t0)/tmax)))
		k := 1
		for bi := 0; bi < nb; bi++ {
			bs := t0 + float64(bi)*tmax
			be := math.Min(t0+float64(bi+1)*tmax, t1)
			if bi == nb-1 {
				be = t1
			}
			b := boundBlock{dur: be - bs, w: make([]float64, len(grid)), s: make([]float64, len(grid)), q: make([]float64, len(grid))}
			k0 := k
			for ; k < len(rec.Time) && (rec.Time[k] <= be || bi == nb-1); k++ {
				b.c += sign(rec.Label[k])
				b.n += math.Abs(sign(rec.Label[k]))
				b.pairs[fluctSide(rec.Label[k-1], fw)][fluctSide(rec.Label[k], fw)]++
			}
			for j, t := range grid {
				nw := int((be - bs) / t * (1 + 1e-12))
				i := k0
				for w := 0; w < nw; w++ {
					end := bs + float64(w+1)*t
					c := 0.0
					for ; i < k && rec.Time[i] <= end; i++ {
						c += sign(rec.Label[i])
					}
					b.w[j]++
					b.s[j] += c
					b.q[j] += c * c
				}
			}
			blocks = append(blocks, b)
		}
	}
	return blocks
}

// TestCurrentBlocksDirect: the pairwise-summed windows equal the directly
// counted ones, bit for bit, on random records with three labels (the
// third counts 0), tied times, times on window boundaries (integer times
// with a power-of-two grid) and known ends.
func TestCurrentBlocksDirect(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for trial := 0; trial < 20; trial++ {
		d := &likelihood.Data{Labels: []string{"+", "-", "x"}}
		for r := 0; r < 1+rng.IntN(4); r++ {
			rec := likelihood.Record{End: math.NaN()}
			tm := rng.Float64() * 10
			for k := 0; k < 1+rng.IntN(3000); k++ {
				switch rng.IntN(5) {
				case 0: // tie
				case 1:
					tm = math.Floor(tm) + 1 // an integer time: often a window boundary
				default:
					tm += rng.ExpFloat64()
				}
				rec.Time = append(rec.Time, tm)
				rec.Label = append(rec.Label, uint8(rng.IntN(3)))
			}
			if rng.IntN(2) == 0 {
				rec.End = tm + rng.Float64()*5
			}
			d.Records = append(d.Records, rec)
		}
		if trial%5 == 0 {
			// An empty record (possible through the library, not the reader).
			d.Records = append(d.Records, likelihood.Record{End: math.NaN()})
		}
		cf := newCurrentFit(d.Records, 0, 1, false)
		if len(cf.grid) == 0 {
			continue
		}
		// The whole grid (about one event per finest window: per-event
		// assignment), its first four points (long windows: search), and
		// an exactly representable grid, so that boundaries fall on
		// integer event times.
		for _, g := range [][]float64{cf.grid, cf.grid[:min(4, len(cf.grid))], {64, 32, 16, 8, 4, 2, 1, 0.5}, {256, 128}} {
			got, _ := currentBlocks(d.Records, 0, 1, g[0], g, 0)
			want := refCurrentBlocks(d.Records, 0, 1, g[0], g)
			if len(got) != len(want) {
				t.Fatalf("trial %d: %d blocks, want %d", trial, len(got), len(want))
			}
			for i := range got {
				a, b := got[i], want[i]
				if a.dur != b.dur || a.c != b.c || a.n != b.n || a.pairs != b.pairs {
					t.Fatalf("trial %d block %d: %+v, want %+v", trial, i, a, b)
				}
				for j := range g {
					if a.w[j] != b.w[j] || a.s[j] != b.s[j] || a.q[j] != b.q[j] {
						t.Fatalf("trial %d block %d grid %d (t = %g): w s q %v %v %v, want %v %v %v", trial, i, j, g[j], a.w[j], a.s[j], a.q[j], b.w[j], b.s[j], b.q[j])
					}
				}
			}
		}
	}
}

// TestDiffusionSummaryBoundsAgree: Summarize and EntropyBounds report the
// same D, with the same SE, interval and method, and the same J, for the
// same data (one estimator, one jackknife). The jackknife draws no random
// numbers, so the seed changes nothing. The delete-one totals, made by
// subtracting one block from the totals, equal sums of all other blocks
// (another route), and the SE of J is close to its long-time value
// sqrt(2 D / T) (Var c(t) ~ 2 D t; within 15%, the relative SD of a
// jackknife SE over 400 blocks being about 5%).
func TestDiffusionSummaryBoundsAgree(t *testing.T) {
	u, w, _ := flSmallRing()
	d := flSimulate(t, flRing(u, w), 40000, 3, 9)
	for _, seed := range []uint64{1, 7} {
		s, err := Summarize(d, SummaryOptions{Seed: seed})
		if err != nil {
			t.Fatal(err)
		}
		b, err := EntropyBounds(d, BoundOptions{Seed: seed})
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range []struct {
			name   string
			sm, bd Estimate
		}{{"D", s.Pooled.Diffusion, b.D}, {"J", s.Pooled.Current, b.J}} {
			if c.sm != c.bd {
				t.Errorf("seed %d: %s differs:\n summary %+v\n bounds  %+v", seed, c.name, c.sm, c.bd)
			}
			if !(c.sm.SE > 0) || !strings.Contains(c.sm.Method, "jackknife") {
				t.Errorf("seed %d: %s has no jackknife interval: %+v", seed, c.name, c.sm)
			}
		}
		t.Logf("seed %d: D = %.5f [%.5f, %.5f]; %s", seed, b.D.Value, b.D.Lo, b.D.Hi, b.D.Method)
	}
	s1, _ := Summarize(d, SummaryOptions{Seed: 1})
	s7, _ := Summarize(d, SummaryOptions{Seed: 7})
	if s1.Pooled.Diffusion != s7.Pooled.Diffusion {
		t.Errorf("the seed changed D: %+v vs %+v", s1.Pooled.Diffusion, s7.Pooled.Diffusion)
	}
	p := s1.Pooled
	if r := p.Current.SE / math.Sqrt(2*p.Diffusion.Value/p.Duration); math.Abs(r-1) > 0.15 {
		t.Errorf("SE(J) %.4g, sqrt(2D/T) %.4g: ratio %.3f", p.Current.SE, math.Sqrt(2*p.Diffusion.Value/p.Duration), r)
	}
	cf := newCurrentFit(d.Records, 0, 1, true)
	i := 0
	cf.jackknife(func(tt *boundTotals) {
		var others []*boundBlock
		for k := range cf.blocks {
			if k != i {
				others = append(others, &cf.blocks[k])
			}
		}
		want := sumBoundBlockPtrs(others, cf.levels)
		// Subtraction and summation round differently: 1e-9 relative.
		if math.Abs(tt.c-want.c) > 1e-9*math.Abs(want.n) || math.Abs(tt.dur-want.dur) > 1e-9*want.dur ||
			math.Abs(cf.diffusion(tt)-cf.diffusion(&want)) > 1e-9*math.Abs(cf.diffusion(&want)) || tt.pairs != want.pairs {
			t.Fatalf("block %d: delete-one totals differ from the sum of the others", i)
		}
		i++
	})
	if !strings.Contains(s1.Pooled.Fano.Method, "windows of t =") {
		t.Errorf("Fano factor does not state its window: %q", s1.Pooled.Fano.Method)
	}
}

// TestFJOneSided: with no -- pair the plug-in F is +Inf and F*J takes
// the conservative rectangle (fjRectangle): lower end F_lo * J_lo, with
// F_lo = ln(CP lower limit of P(+|+)) - ln(CP upper limit of P(-|-) = 0),
// each at tail a/4, and J_lo = J - t SE(J) at 1 - a/2; upper end +Inf.
// With the labels swapped (no ++ pair, F = -Inf, J < 0) the lower end is
// F_hi * J_hi. The labels are a first-order chain (after - always +, after
// + a - with probability 1/4), so the bounds hold.
func TestFJOneSided(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	var rec likelihood.Record
	rec.End = math.NaN()
	l := uint8(0)
	for k := 0; k < 4000; k++ {
		rec.Time = append(rec.Time, float64(k)+rng.Float64()*0.5)
		rec.Label = append(rec.Label, l)
		if l == 1 || rng.Float64() >= 0.25 {
			l = 0
		} else {
			l = 1
		}
	}
	d := &likelihood.Data{Labels: []string{"+", "-"}, Records: []likelihood.Record{rec}}
	for _, swap := range []bool{false, true} {
		var opt BoundOptions
		if swap {
			opt.Labels = EdgeLabels{Forward: "-", Backward: "+"}
		}
		b, err := EntropyBounds(d, opt)
		if err != nil {
			t.Fatal(err)
		}
		if !b.Claimed {
			t.Fatalf("swap %v: bounds withheld: %s", swap, b.Reason)
		}
		if !math.IsInf(b.F.Value, 0) {
			t.Fatalf("swap %v: F %+v", swap, b.F)
		}
		c := TransitionCounts(d)
		a := 0.05
		tq := studentT(1-a/2, b.JackknifeBlocks-1)
		var bound float64
		if !swap {
			flo := math.Log(cpLower(c[0][0], c[0][0]+c[0][1], a/4)) - math.Log(cpUpper(0, c[1][0]+c[1][1], a/4))
			bound = flo * (b.J.Value - tq*b.J.SE)
		} else {
			fhi := math.Log(cpUpper(0, c[1][0]+c[1][1], a/4)) - math.Log(cpLower(c[0][0], c[0][0]+c[0][1], a/4))
			bound = fhi * (b.J.Value + tq*b.J.SE)
		}
		// Exact up to rounding of the product and of the t quantile.
		if !(bound > 0) || !math.IsInf(b.FJ.Value, 1) || math.Abs(b.FJ.Lo-bound) > 1e-9*bound || !math.IsInf(b.FJ.Hi, 1) ||
			!strings.Contains(b.FJ.Method, "Bonferroni") {
			t.Errorf("swap %v: F*J %+v, want lower end %v", swap, b.FJ, bound)
		}
	}
}
