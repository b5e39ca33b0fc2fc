package infer

import (
	"fmt"
	"math"

	"edgewise/likelihood"

	"gonum.org/v1/gonum/stat/distuv"
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
// each l, the independence G test of the groups x next-label table of
// counts n_g[l][l'], summed over l (Anderson and Goodman 1957). counts
// holds the groups one after another, each a k x k table row by row
// (counts[(g k + l) k + l']); rows is scratch space, grown as needed. It
// also returns the number of pairs.
func homogeneityG(counts []int, k int, rows []float64) (g float64, df, n int, _ []float64) {
	if k == 0 || len(counts) == 0 {
		return 0, 0, 0, rows
	}
	groups := len(counts) / (k * k)
	if cap(rows) < groups {
		rows = make([]float64, groups)
	}
	rows = rows[:groups]
	cols := make([]float64, k)
	for l := 0; l < k; l++ {
		clear(cols)
		tot := 0.0
		for gi := range groups {
			row := counts[(gi*k+l)*k : (gi*k+l+1)*k]
			s := 0
			for b, v := range row {
				s += v
				cols[b] += float64(v)
			}
			rows[gi] = float64(s)
			tot += float64(s)
		}
		if tot == 0 {
			continue
		}
		n += int(tot)
		gl := 0.0
		nr, nc := 0, 0
		for gi := range groups {
			if rows[gi] == 0 {
				continue
			}
			nr++
			row := counts[(gi*k+l)*k : (gi*k+l+1)*k]
			for b, v := range row {
				if v > 0 {
					x := float64(v)
					gl += x * math.Log(x*tot/(rows[gi]*cols[b]))
				}
			}
		}
		for _, v := range cols {
			if v > 0 {
				nc++
			}
		}
		g += math.Max(0, 2*gl)
		df += max(0, (nr-1)*(nc-1))
	}
	return g, df, n, rows
}

// RecordStationarity compares the first and second half of one record.
type RecordStationarity struct {
	ID string
	// Next tests that P(l'|l) is the same in both halves (pairs split at
	// the middle event): G statistic, chi-square.
	Next TestResult
	// MeanGap compares the mean gap between consecutive events of the two
	// halves: t = (m1 - m2)/sqrt(v1 + v2), v the variance of each half's
	// mean by batch means (batchMeans: consecutive gaps are correlated,
	// through the labels, and an i.i.d. variance s^2/n made this test
	// reject 10% of stationary ring3 data sets at 5%), referred to Student
	// t on (batches - 2) degrees of freedom; P is that two-sided p-value
	// and Stat = z^2, z its normal score, with 1 degree of freedom.
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
	// Q = sum_r w_r (m_r - m_w)^2, w_r = 1/v_r (v_r the batch-means
	// variance of record r's mean gap), m_w the w-weighted mean,
	// chi-square with R - 1 degrees of freedom (Cochran's heterogeneity
	// statistic). Not computed for a single record.
	BetweenNext, BetweenGap TestResult
}

// StationarityTest compares P(l'|l) and the mean gaps between the first
// and second half of each record and between records. The mean-gap tests
// estimate the variance of a mean gap by batch means, since consecutive
// gaps are correlated through the labels; the G tests treat transition
// counts as multinomial given the visits (Anderson and Goodman 1957).
func StationarityTest(d *likelihood.Data) Stationarity { return stationarity(d, true) }

// stationarity is StationarityTest; without perRecord it leaves
// Stationarity.Records empty (the pooled tests are the same).
func stationarity(d *likelihood.Data, perRecord bool) Stationarity {
	k := len(d.Labels)
	kk := k * k
	var s Stationarity
	nr := len(d.Records)
	if perRecord {
		s.Records = make([]RecordStationarity, 0, nr)
	}
	// Per record: mean gap, the variance of that mean, batches, gaps.
	gm, gv := make([]float64, 0, nr), make([]float64, 0, nr)
	gn, gc := make([]int, 0, nr), make([]int, 0, nr)
	all := make([]int, nr*kk)   // per record, its pair counts (flat)
	halves := make([]int, 2*kk) // the two halves of one record
	var gaps, rows []float64    // reused for every record
	for i := range d.Records {
		r := &d.Records[i]
		rs := RecordStationarity{ID: r.ID}
		n := r.Len()
		half := n / 2 // pairs ending at events 1..half form the first half
		clear(halves)
		own := all[i*kk : (i+1)*kk]
		gaps = gaps[:0]
		for j := 1; j < n; j++ {
			gaps = append(gaps, r.Time[j]-r.Time[j-1])
			ab := int(r.Label[j-1])*k + int(r.Label[j])
			own[ab]++
			if j <= half {
				halves[ab]++
			} else {
				halves[kk+ab]++
			}
		}
		h := min(half, len(gaps)) // gaps 0..h-1 end at events 1..half
		m1, v1, b1 := batchMeans(gaps[:h])
		m2, v2, b2 := batchMeans(gaps[h:])
		var g float64
		var df, np int
		g, df, np, rows = homogeneityG(halves, k, rows)
		rs.Next = TestResult{Stat: g, DF: df, P: chiSquareSF(g, df), N: np}
		rs.MeanFirst, rs.MeanSecond = m1, m2
		rs.MeanGap = TestResult{N: len(gaps), DF: 1}
		if b1 >= 2 && b2 >= 2 && v1+v2 > 0 {
			// Student t on the batches' degrees of freedom, turned into
			// the normal score of its two-sided p so that records sum as
			// chi-square.
			tt := (m1 - m2) / math.Sqrt(v1+v2)
			p := 2 * distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(b1 + b2 - 2)}.Survival(math.Abs(tt))
			z := normalScore(math.Log(p))
			rs.MeanGap.Stat = z * z
			rs.MeanGap.P = p
		} else {
			rs.MeanGap.Stat, rs.MeanGap.P, rs.MeanGap.DF = math.NaN(), math.NaN(), 0
			rs.MeanGap.Note = "too few gaps"
		}
		if df == 0 {
			rs.Next.P = math.NaN()
			rs.Next.Note = "no degrees of freedom"
		}
		if perRecord {
			s.Records = append(s.Records, rs)
		}
		s.HalvesNext.Stat += rs.Next.Stat
		s.HalvesNext.DF += rs.Next.DF
		s.HalvesNext.N += rs.Next.N
		if rs.MeanGap.DF > 0 {
			s.HalvesGap.Stat += rs.MeanGap.Stat
			s.HalvesGap.DF++
			s.HalvesGap.N += rs.MeanGap.N
		}
		m, v, nb := batchMeans(gaps)
		gm, gv, gn, gc = append(gm, m), append(gv, v), append(gn, nb), append(gc, len(gaps))
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
	g, df, np, _ := homogeneityG(all, k, rows)
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
		w := 1 / gv[i] // gv is the variance of the record's mean gap
		ws, ms = append(ws, w), append(ms, gm[i])
		sw += w
		swm += w * gm[i]
		used += gc[i]
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

// batchMeans returns the mean of x, the variance of that mean estimated
// from non-overlapping batches of b = ceil(sqrt(n)) consecutive values
// (the method of batch means: the variance of the batch means divided by
// their number, which keeps the correlation of neighbouring gaps that an
// i.i.d. variance s^2/n ignores), and the number of batches. The last
// batch takes the remainder. NaN variance with fewer than two batches.
func batchMeans(x []float64) (mean, varMean float64, batches int) {
	n := len(x)
	if n == 0 {
		return math.NaN(), math.NaN(), 0
	}
	b := int(math.Ceil(math.Sqrt(float64(n))))
	batches = n / b
	if batches < 2 {
		m, _ := meanVar(x)
		return m, math.NaN(), batches
	}
	bm := make([]float64, batches)
	sum := 0.0
	for i := range bm {
		lo, hi := i*b, (i+1)*b
		if i == batches-1 {
			hi = n
		}
		s := 0.0
		for _, v := range x[lo:hi] {
			s += v
		}
		sum += s
		bm[i] = s / float64(hi-lo)
	}
	mean = sum / float64(n)
	_, vb := meanVar(bm)
	return mean, vb / float64(batches), batches
}
