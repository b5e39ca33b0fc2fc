package infer

import (
	"math/rand/v2"
	"slices"
	"testing"

	"edgewise/likelihood"
)

// TestFluctBlocksDirect: the table-driven, one-pass window builders give
// exactly the blocks of the direct forms below (a sweep over the windows
// with a branch per label), on random two-label records with tied times,
// times on window boundaries and known ends.
func TestFluctBlocksDirect(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for trial := 0; trial < 30; trial++ {
		d := &likelihood.Data{Labels: []string{"-", "+"}}
		for r := 0; r < 1+rng.IntN(4); r++ {
			rec := likelihood.Record{End: -1}
			tm := 0.0
			for k := 0; k < 1+rng.IntN(5000); k++ {
				switch rng.IntN(6) {
				case 0: // tie
				case 1:
					tm = float64(int(tm) + 1)
				default:
					tm += rng.ExpFloat64()
				}
				rec.Time = append(rec.Time, tm)
				rec.Label = append(rec.Label, uint8(rng.IntN(2)))
			}
			rec.End = tm + rng.Float64()
			d.Records = append(d.Records, rec)
		}
		fw := uint8(rng.IntN(2))
		for _, n := range []int{1, 3, 8, 40} {
			eq := func(kind string, a, b []fluctBlock) {
				t.Helper()
				if len(a) != len(b) {
					t.Fatalf("trial %d n %d %s: %d blocks, want %d", trial, n, kind, len(a), len(b))
				}
				for i := range a {
					// A block without windows may keep no count slice.
					same := slices.Equal(a[i].count, b[i].count) || (a[i].count == nil && !slices.ContainsFunc(b[i].count, func(v int64) bool { return v != 0 }))
					if !same || a[i].pairs != b[i].pairs {
						t.Fatalf("trial %d n %d %s block %d: %+v, want %+v", trial, n, kind, i, a[i], b[i])
					}
				}
			}
			raw, post := fluctCountBlocks(d, fw, n, 50)
			rraw, rpost := refFluctCountBlocks(d, fw, n, 50)
			eq("raw", raw, rraw)
			eq("post", post, rpost)
			tb, T, cmax := fluctTimeBlocks(d, fw, n, 50)
			rtb, rT, rcmax := refFluctTimeBlocks(d, fw, n, 50)
			if T != rT || cmax != rcmax {
				t.Fatalf("trial %d n %d: T %v cmax %d, want %v %d", trial, n, T, cmax, rT, rcmax)
			}
			eq("fixed-time", tb, rtb)
		}
	}
}

// refFluctCountBlocks and refFluctTimeBlocks are the direct forms.
func refFluctCountBlocks(d *likelihood.Data, fw uint8, n, minEvents int) (raw, post []fluctBlock) {
	total := 0
	for r := range d.Records {
		total += len(d.Records[r].Label) / n
	}
	per := max(1, (minEvents+n-1)/n, (total+maxBlocks-1)/maxBlocks) // windows per block
	width := 2*n + 1
	for r := range d.Records {
		lab := d.Records[r].Label
		nw := len(lab) / n
		nb := max(1, (nw+per-1)/per)
		for b := 0; b < nb; b++ {
			rb := fluctBlock{count: make([]int64, width)}
			pb := fluctBlock{count: make([]int64, width)}
			w0, w1 := b*per, min(nw, (b+1)*per)
			for w := w0; w < w1; w++ {
				win := lab[w*n : (w+1)*n]
				c := 0
				for _, l := range win {
					if l == fw {
						c++
					} else {
						c--
					}
				}
				rb.count[c+n]++
				if (win[0] == fw) != (win[n-1] == fw) {
					pb.count[c+n]++
				}
			}
			// Pairs (k-1, k) with k in this block's events; the last block
			// of a record takes the tail too.
			k0, k1 := w0*n, w1*n
			if b == nb-1 {
				k1 = len(lab)
			}
			for k := max(k0, 1); k < k1; k++ {
				rb.pairs[fluctSide(lab[k-1], fw)][fluctSide(lab[k], fw)]++
			}
			pb.pairs = rb.pairs
			raw = append(raw, rb)
			post = append(post, pb)
		}
	}
	return raw, post
}

func refFluctTimeBlocks(d *likelihood.Data, fw uint8, n, minEvents int) ([]fluctBlock, float64, int) {
	span, events := fluctObserved(d)
	if events == 0 || !(span > 0) {
		return nil, 0, 0
	}
	T := float64(n) * span / float64(events)
	total := 0
	for r := range d.Records {
		t0, t1 := fluctSpan(&d.Records[r])
		total += int((t1 - t0) / T)
	}
	per := max(1, (minEvents+n-1)/n, (total+maxBlocks-1)/maxBlocks)
	cs := make([]int32, 0, total) // window currents
	wb := make([]int32, 0, total) // window blocks
	var pairsBy [][2][2]int64
	cmax := 0
	nblock := 0
	for r := range d.Records {
		rec := &d.Records[r]
		t0, t1 := fluctSpan(rec)
		nw := int((t1 - t0) / T)
		nb := max(1, (nw+per-1)/per)
		base := nblock
		nblock += nb
		for range nb {
			pairsBy = append(pairsBy, [2][2]int64{})
		}
		k := 1
		for w := 0; w < nw; w++ {
			end := t0 + float64(w+1)*T
			c := 0
			for ; k < len(rec.Time) && rec.Time[k] <= end; k++ {
				if rec.Label[k] == fw {
					c++
				} else {
					c--
				}
			}
			cs = append(cs, int32(c))
			wb = append(wb, int32(base+w/per))
			cmax = max(cmax, c, -c)
		}
		for k := 1; k < len(rec.Time); k++ {
			b := min(nb-1, int((rec.Time[k-1]-t0)/(T*float64(per))))
			pairsBy[base+b][fluctSide(rec.Label[k-1], fw)][fluctSide(rec.Label[k], fw)]++
		}
	}
	blocks := make([]fluctBlock, nblock)
	for i := range blocks {
		blocks[i] = fluctBlock{count: make([]int64, 2*cmax+1), pairs: pairsBy[i]}
	}
	for i, c := range cs {
		blocks[wb[i]].count[int(c)+cmax]++
	}
	return blocks, T, cmax
}
