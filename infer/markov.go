package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"
)

// TestResult is the outcome of a likelihood-ratio or chi-square test.
type TestResult struct {
	Stat float64 // test statistic (G = 2 ln LR, or a chi-square sum)
	DF   int     // degrees of freedom
	P    float64 // p-value, P(chi2_DF >= Stat)
	N    int     // number of observations used (triplets, pairs, gaps)
	Note string
}

// MarkovOrderTest tests first- against second-order Markov dependence of
// the label sequence (Anderson and Goodman, Ann. Math. Stat. 28, 89
// (1957), section 3.4). From the counts n_ijk of consecutive triplets
// (i, j, k) within records,
//
//	G = 2 sum_ijk n_ijk ln[ n_ijk n_.j. / (n_ij. n_.jk) ],
//
// which under first-order dependence is asymptotically chi-square with
// sum_j (r_j - 1)(c_j - 1) degrees of freedom, where r_j and c_j are the
// numbers of labels seen before and after j in triplets with middle j (for
// full tables, s(s-1)^2 with s labels; structural zeros remove their
// cells). A single visible edge with any detection probability keeps the
// labels first-order Markov, since after each seen event the hidden state
// is known; rejection points to spurious events, a label shared by several
// edges, or hidden memory that no single-edge scheme has.
func MarkovOrderTest(d *likelihood.Data) TestResult {
	k := len(d.Labels)
	n := make([]float64, k*k*k)
	tri := 0
	for i := range d.Records {
		lab := d.Records[i].Label
		for t := 2; t < len(lab); t++ {
			n[(int(lab[t-2])*k+int(lab[t-1]))*k+int(lab[t])]++
			tri++
		}
	}
	r := TestResult{N: tri}
	for j := 0; j < k; j++ {
		tab := make([][]float64, k)
		for i := 0; i < k; i++ {
			tab[i] = n[(i*k+j)*k : (i*k+j)*k+k]
		}
		g, df := independenceG(tab)
		r.Stat += g
		r.DF += df
	}
	r.P = chiSquareSF(r.Stat, r.DF)
	if r.DF == 0 {
		r.P = math.NaN()
		r.Note = "no degrees of freedom: every label has a single predecessor or successor in the data"
	}
	return r
}

// independenceG returns the likelihood-ratio statistic
// G = 2 sum n_ab ln(n_ab n / (n_a. n_.b)) for independence of rows and
// columns of a contingency table, and its degrees of freedom
// (nonzero rows - 1)(nonzero columns - 1).
func independenceG(tab [][]float64) (g float64, df int) {
	if len(tab) == 0 {
		return 0, 0
	}
	rows := make([]float64, len(tab))
	cols := make([]float64, len(tab[0]))
	tot := 0.0
	for a, row := range tab {
		for b, v := range row {
			rows[a] += v
			cols[b] += v
			tot += v
		}
	}
	if tot == 0 {
		return 0, 0
	}
	for a, row := range tab {
		for b, v := range row {
			if v > 0 {
				g += v * math.Log(v*tot/(rows[a]*cols[b]))
			}
		}
	}
	nr, nc := 0, 0
	for _, v := range rows {
		if v > 0 {
			nr++
		}
	}
	for _, v := range cols {
		if v > 0 {
			nc++
		}
	}
	return math.Max(0, 2*g), max(0, (nr-1)*(nc-1))
}

// homogeneityG tests that groups share the conditional law P(l'|l): for
// each l it forms the table groups x next label of counts N_g[l][l'] and
// sums the G statistics and degrees of freedom of independenceG over l.
func homogeneityG(groups [][][]int) (g float64, df, n int) {
	if len(groups) == 0 {
		return 0, 0, 0
	}
	k := len(groups[0])
	for l := 0; l < k; l++ {
		tab := make([][]float64, len(groups))
		for gi, c := range groups {
			tab[gi] = make([]float64, k)
			for b := 0; b < k; b++ {
				tab[gi][b] = float64(c[l][b])
				n += c[l][b]
			}
		}
		gl, dl := independenceG(tab)
		g += gl
		df += dl
	}
	return g, df, n
}

// RecordStationarity compares the first and second half of one record.
type RecordStationarity struct {
	ID string
	// Next tests that P(l'|l) is the same in both halves (pairs split at
	// the middle event): G statistic, chi-square.
	Next TestResult
	// MeanGap compares the mean gap between consecutive events of the two
	// halves: Welch's z = (m1 - m2)/sqrt(s1^2/n1 + s2^2/n2), reported as
	// Stat = z^2 with 1 degree of freedom.
	MeanGap               TestResult
	MeanFirst, MeanSecond float64 // mean gaps of the halves (time)
}

// Stationarity holds the drift and heterogeneity checks.
type Stationarity struct {
	Records []RecordStationarity
	// Halves pools the per-record half comparisons: the sums of the G
	// statistics (and of z^2 for mean gaps) with summed degrees of freedom,
	// valid because records are independent.
	HalvesNext, HalvesGap TestResult
	// Between compares records with each other: homogeneity of P(l'|l)
	// across records (G), and of the mean gaps by
	// Q = sum_r w_r (m_r - m_w)^2, w_r = n_r/s_r^2, m_w the w-weighted mean,
	// chi-square with R - 1 degrees of freedom (Cochran's heterogeneity
	// statistic). Not computed for a single record.
	BetweenNext, BetweenGap TestResult
}

// StationarityTest compares P(l'|l) and the mean gaps between the first
// and second half of each record and between records. The tests treat
// consecutive gaps as independent, which holds only approximately (gaps
// that follow different labels have different laws): they flag drift of a
// size that matters, not a subtle one.
func StationarityTest(d *likelihood.Data) Stationarity {
	k := len(d.Labels)
	var s Stationarity
	var gm, gv []float64 // per record, mean and variance of its gaps
	var gn []int
	var all [][][]int
	for i := range d.Records {
		r := &d.Records[i]
		rs := RecordStationarity{ID: r.ID}
		n := r.Len()
		half := n / 2 // pairs ending at events 1..half form the first half
		c1 := make([][]int, k)
		c2 := make([][]int, k)
		for a := range c1 {
			c1[a] = make([]int, k)
			c2[a] = make([]int, k)
		}
		var g1, g2, gall moments
		for j := 1; j < n; j++ {
			gap := r.Time[j] - r.Time[j-1]
			if j <= half {
				c1[r.Label[j-1]][r.Label[j]]++
				g1.add(gap)
			} else {
				c2[r.Label[j-1]][r.Label[j]]++
				g2.add(gap)
			}
			gall.add(gap)
		}
		g, df, np := homogeneityG([][][]int{c1, c2})
		rs.Next = TestResult{Stat: g, DF: df, P: chiSquareSF(g, df), N: np}
		m1, v1 := g1.meanVar()
		m2, v2 := g2.meanVar()
		rs.MeanFirst, rs.MeanSecond = m1, m2
		rs.MeanGap = TestResult{N: g1.n + g2.n, DF: 1}
		if g1.n >= 2 && g2.n >= 2 && v1+v2 > 0 {
			z := (m1 - m2) / math.Sqrt(v1/float64(g1.n)+v2/float64(g2.n))
			rs.MeanGap.Stat = z * z
			rs.MeanGap.P = normalSF2(z)
		} else {
			rs.MeanGap.Stat, rs.MeanGap.P, rs.MeanGap.DF = math.NaN(), math.NaN(), 0
			rs.MeanGap.Note = "too few gaps"
		}
		if df == 0 {
			rs.Next.P = math.NaN()
			rs.Next.Note = "no degrees of freedom"
		}
		s.Records = append(s.Records, rs)
		s.HalvesNext.Stat += rs.Next.Stat
		s.HalvesNext.DF += rs.Next.DF
		s.HalvesNext.N += rs.Next.N
		if rs.MeanGap.DF > 0 {
			s.HalvesGap.Stat += rs.MeanGap.Stat
			s.HalvesGap.DF++
			s.HalvesGap.N += rs.MeanGap.N
		}
		all = append(all, RecordTransitionCounts(r, k))
		m, v := gall.meanVar()
		gm, gv, gn = append(gm, m), append(gv, v), append(gn, gall.n)
	}
	s.HalvesNext.P = chiSquareSF(s.HalvesNext.Stat, s.HalvesNext.DF)
	s.HalvesGap.P = chiSquareSF(s.HalvesGap.Stat, s.HalvesGap.DF)
	if s.HalvesNext.DF == 0 {
		s.HalvesNext.P = math.NaN()
	}
	if s.HalvesGap.DF == 0 {
		s.HalvesGap.P = math.NaN()
	}
	if len(d.Records) < 2 {
		note := "a single record: nothing to compare"
		s.BetweenNext = TestResult{Stat: math.NaN(), P: math.NaN(), Note: note}
		s.BetweenGap = TestResult{Stat: math.NaN(), P: math.NaN(), Note: note}
		return s
	}
	g, df, np := homogeneityG(all)
	s.BetweenNext = TestResult{Stat: g, DF: df, P: chiSquareSF(g, df), N: np}
	if df == 0 {
		s.BetweenNext.P = math.NaN()
	}
	// Cochran's Q over records with at least two gaps and a positive variance.
	sw, swm := 0.0, 0.0
	var ws, ms []float64
	used := 0
	for i := range gm {
		if gn[i] < 2 || !(gv[i] > 0) {
			continue
		}
		w := float64(gn[i]) / gv[i]
		ws, ms = append(ws, w), append(ms, gm[i])
		sw += w
		swm += w * gm[i]
		used += gn[i]
	}
	if len(ws) < 2 {
		s.BetweenGap = TestResult{Stat: math.NaN(), P: math.NaN(), Note: "fewer than two records with gaps to compare"}
		return s
	}
	mw := swm / sw
	q := 0.0
	for i := range ws {
		q += ws[i] * (ms[i] - mw) * (ms[i] - mw)
	}
	s.BetweenGap = TestResult{Stat: q, DF: len(ws) - 1, P: chiSquareSF(q, len(ws)-1), N: used}
	if len(ws) < len(gm) {
		s.BetweenGap.Note = fmt.Sprintf("%d records with fewer than two gaps left out", len(gm)-len(ws))
	}
	return s
}
