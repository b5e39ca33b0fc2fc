package likelihood

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"

	"gonum.org/v1/gonum/mat"
)

// ExpMethod names a route for the matrix exponential exp(A t).
type ExpMethod int

const (
	// ExpAuto uses the spectral route when the eigenvector matrix is well
	// conditioned and the eigenvalues are well separated (see
	// SpectralMaxCond and SpectralMinGap), and scaling-and-squaring Pade
	// otherwise.
	ExpAuto ExpMethod = iota
	// ExpSpectral: A = V diag(lambda) V^{-1} once, then
	// exp(A t) = V diag(e^{lambda t}) V^{-1}, evaluated in the real block
	// basis (complex pairs as 2x2 rotation blocks). Cost O(N^3) once, then
	// O(N^2) per matrix-vector product. Error about cond(V) * eps.
	ExpSpectral
	// ExpPade: scaling and squaring with a Pade approximant (gonum
	// mat.Dense.Exp, Higham's algorithm 10.20 in "Functions of Matrices",
	// SIAM 2008). O(N^3) per time value.
	ExpPade
	// ExpUniform: uniformisation, exp(A t) = sum_n Pois(n; q t) P^n with
	// P = I + A/q and q = max_i |A_ii|, on a step with q t <= 1, then
	// squaring. Every term is non-negative for a (sub-)generator, so there is
	// no cancellation. Requires A_ij >= 0 off the diagonal.
	ExpUniform
)

// String returns the method's name.
func (m ExpMethod) String() string {
	switch m {
	case ExpAuto:
		return "auto"
	case ExpSpectral:
		return "spectral"
	case ExpPade:
		return "pade"
	case ExpUniform:
		return "uniformisation"
	}
	return fmt.Sprintf("ExpMethod(%d)", int(m))
}

// Thresholds of the automatic choice (ExpAuto). The spectral route is used
// when the 1-norm condition number of the (column-normalised) eigenvector
// matrix is at most SpectralMaxCond, so that the rounding error of
// V e^{Lambda t} V^{-1} stays near cond * eps ~ 2e-10 or better, and every
// pair of eigenvalues satisfies |l_i - l_j| >= SpectralMinGap * max(|l_i|, |l_j|),
// so that the divided differences (e^{l_i t} - e^{l_j t})/(l_i - l_j) used
// by the gradient lose at most about eps/SpectralMinGap relative to their
// size. A defective (Jordan) matrix, for example the generator of an
// irreversible ring with equal rates, fails the first test; two identical
// blocks fail the second.
const (
	SpectralMaxCond = 1e6
	SpectralMinGap  = 1e-6
)

// spectral is A = W B W^{-1} in the real block-diagonal basis: B holds a
// 1x1 block lambda for a real eigenvalue and a 2x2 block [[a, b], [-b, a]]
// for a complex pair a +- ib (columns x, y of W with v = x + iy the
// eigenvector of a + ib). The complex eigenvector matrix is V = W T with
// T = [[1, 1], [i, -i]] on each pair.
type spectral struct {
	n    int
	lam  []complex128 // eigenvalue of each column; for a pair lam[k] = a+ib, lam[k+1] = a-ib
	kind []int8       // 0 real, 1 first of a pair, 2 second of a pair
	w    []float64    // W, row-major n x n
	wi   []float64    // W^{-1}, row-major
	v    []complex128 // V, row-major
	vi   []complex128 // V^{-1}, row-major
	cond float64      // ||W||_1 ||W^{-1}||_1
	gap  float64      // min |l_i - l_j| / max(|l_i|, |l_j|)
	// rdiff[k*n+l] = 1/(lam_k - lam_l) for k != l (0 on the diagonal).
	rdiff []complex128
	// lmax is the largest real part of an eigenvalue (for a sub-generator,
	// the real Perron eigenvalue, < 0). The coefficient routines return
	// e^{(lambda - lmax) t} and the shift lmax t separately, so that long
	// gaps do not underflow.
	lmax  float64
	reals []realEig
	pairs []pairEig
}

type realEig struct {
	k   int
	lam float64
}

type pairEig struct {
	k    int
	a, b float64 // lambda = a + ib at column k, a - ib at k+1
}

// newSpectral decomposes the square matrix a. It fails only when the
// eigen-decomposition fails or V is numerically singular.
func newSpectral(a *mat.Dense) (*spectral, error) {
	n, _ := a.Dims()
	var eig mat.Eigen
	if ok := eig.Factorize(a, mat.EigenRight); !ok {
		return nil, errors.New("eigen-decomposition failed")
	}
	vals := eig.Values(nil)
	var cv mat.CDense
	eig.VectorsTo(&cv)
	s := &spectral{
		n: n, lam: make([]complex128, n), kind: make([]int8, n),
		w: make([]float64, n*n), wi: make([]float64, n*n),
		v: make([]complex128, n*n), vi: make([]complex128, n*n),
		rdiff: make([]complex128, n*n),
	}
	for k := 0; k < n; k++ {
		if imag(vals[k]) == 0 || k == n-1 {
			s.lam[k] = complex(real(vals[k]), 0)
			var nrm float64
			for i := 0; i < n; i++ {
				nrm = math.Hypot(nrm, real(cv.At(i, k)))
			}
			if nrm == 0 {
				nrm = 1
			}
			for i := 0; i < n; i++ {
				s.w[i*n+k] = real(cv.At(i, k)) / nrm
			}
			continue
		}
		s.lam[k], s.lam[k+1] = vals[k], cmplx.Conj(vals[k])
		s.kind[k], s.kind[k+1] = 1, 2
		for i := 0; i < n; i++ {
			z := cv.At(i, k)
			s.w[i*n+k], s.w[i*n+k+1] = real(z), imag(z)
		}
		k++
	}
	wd := mat.NewDense(n, n, s.w)
	var winv mat.Dense
	if err := winv.Inverse(wd); err != nil {
		var c mat.Condition
		if !errors.As(err, &c) {
			return nil, fmt.Errorf("eigenvector matrix is singular: %w", err)
		}
	}
	copy(s.wi, winv.RawMatrix().Data)
	for _, x := range s.wi {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, errors.New("eigenvector matrix is singular")
		}
	}
	s.cond = mat.Norm(wd, 1) * mat.Norm(&winv, 1)
	// Complex V and V^{-1}.
	for k := 0; k < n; k++ {
		switch s.kind[k] {
		case 0:
			for i := 0; i < n; i++ {
				s.v[i*n+k] = complex(s.w[i*n+k], 0)
				s.vi[k*n+i] = complex(s.wi[k*n+i], 0)
			}
		case 1:
			for i := 0; i < n; i++ {
				x, y := s.w[i*n+k], s.w[i*n+k+1]
				s.v[i*n+k], s.v[i*n+k+1] = complex(x, y), complex(x, -y)
				p, q := s.wi[k*n+i], s.wi[(k+1)*n+i]
				s.vi[k*n+i], s.vi[(k+1)*n+i] = complex(p/2, -q/2), complex(p/2, q/2)
			}
		}
	}
	s.lmax = math.Inf(-1)
	for k := 0; k < n; k++ {
		s.lmax = math.Max(s.lmax, real(s.lam[k]))
		switch s.kind[k] {
		case 0:
			s.reals = append(s.reals, realEig{k, real(s.lam[k])})
		case 1:
			s.pairs = append(s.pairs, pairEig{k, real(s.lam[k]), imag(s.lam[k])})
		}
	}
	if s.lmax > 0 {
		// Not a sub-generator (tests use the propagator on generators too):
		// no shift is needed for accuracy there.
		s.lmax = 0
	}
	s.gap = math.Inf(1)
	for k := 0; k < n; k++ {
		for l := 0; l < n; l++ {
			if k == l {
				continue
			}
			d := s.lam[k] - s.lam[l]
			sc := math.Max(cmplx.Abs(s.lam[k]), cmplx.Abs(s.lam[l]))
			g := 0.0
			if sc > 0 {
				g = cmplx.Abs(d) / sc
			}
			s.gap = math.Min(s.gap, g)
			if d != 0 {
				s.rdiff[k*n+l] = 1 / d
			}
		}
	}
	return s, nil
}

// good reports whether the automatic rule accepts the spectral route.
func (s *spectral) good() bool {
	return s.cond <= SpectralMaxCond && s.gap >= SpectralMinGap && !math.IsNaN(s.cond)
}

// coefExact fills z with the block coefficients of e^{(lambda - lmax) t}:
// z[k] for a real eigenvalue, (z[k], z[k+1]) = (Re, Im) for a pair. When d
// is not nil it also fills d with t e^{(lambda - lmax) t} in the same
// layout (the diagonal divided difference used by the gradient). It
// returns the shift lmax t: exp(D0 t) = e^{shift} W B(z) W^{-1}.
func (s *spectral) coefExact(t float64, z, d []float64) float64 {
	lm := s.lmax
	for _, r := range s.reals {
		z[r.k] = math.Exp((r.lam - lm) * t)
	}
	for _, p := range s.pairs {
		e := math.Exp((p.a - lm) * t)
		sn, cs := math.Sincos(p.b * t)
		z[p.k], z[p.k+1] = e*cs, e*sn
	}
	if d != nil {
		for i := range z {
			d[i] = t * z[i]
		}
	}
	return lm * t
}

// cexpm1 returns e^z - 1 without cancellation for small |z|.
func cexpm1(z complex128) complex128 {
	x, y := real(z), imag(z)
	if y == 0 {
		return complex(math.Expm1(x), 0)
	}
	sn, cs := math.Sincos(y)
	h := math.Sin(y / 2)
	return complex(math.Expm1(x)*cs-2*h*h, math.Exp(x)*sn)
}

// intCoef returns I = e^{-lm lo} int_lo^hi e^{l s} ds and, when wantD,
// J = e^{-lm lo} int_lo^hi s e^{l s} ds.
func intCoef(l complex128, lm, lo, hi float64, wantD bool) (complex128, complex128) {
	w := hi - lo
	el := cmplx.Exp((l - complex(lm, 0)) * complex(lo, 0))
	lw := l * complex(w, 0)
	var i0 complex128 // int_0^w e^{l u} du
	var j0 complex128 // int_0^w u e^{l u} du
	if cmplx.Abs(lw) < 0.5 {
		// Series: i0 = w sum (lw)^n/(n+1)!, j0 = w^2 sum (lw)^n/(n! (n+2)).
		term := complex(1, 0) // (lw)^n/n!
		var si, sj complex128
		for n := 0; n < 30; n++ {
			si += term / complex(float64(n+1), 0)
			sj += term / complex(float64(n+2), 0)
			term *= lw / complex(float64(n+1), 0)
		}
		i0 = complex(w, 0) * si
		j0 = complex(w*w, 0) * sj
	} else {
		em := cexpm1(lw)
		i0 = em / l
		if wantD {
			j0 = (complex(w, 0)*(em+1) - i0) / l
		}
	}
	i := el * i0
	var j complex128
	if wantD {
		j = complex(lo, 0)*i + el*j0
	}
	return i, j
}

// coefInterval fills z with the block coefficients of
// e^{-lmax lo} int_lo^hi e^{lambda s} ds and, when d is not nil, d with
// e^{-lmax lo} int_lo^hi s e^{lambda s} ds; it returns the shift lmax lo.
func (s *spectral) coefInterval(lo, hi float64, z, d []float64) float64 {
	for k := 0; k < s.n; k++ {
		if s.kind[k] == 2 {
			continue
		}
		i, j := intCoef(s.lam[k], s.lmax, lo, hi, d != nil)
		z[k] = real(i)
		if d != nil {
			d[k] = real(j)
		}
		if s.kind[k] == 1 {
			z[k+1] = imag(i)
			if d != nil {
				d[k+1] = imag(j)
			}
		}
	}
	return s.lmax * lo
}

// rowBlock applies the block coefficients to a row vector u in the W
// basis, in place: u <- u B(z).
func (s *spectral) rowBlock(u, z []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			u[k] *= z[k]
		case 1:
			zr, zi := z[k], z[k+1]
			a, b := u[k], u[k+1]
			u[k], u[k+1] = a*zr-b*zi, a*zi+b*zr
			k++
		}
	}
}

// colBlock applies the block coefficients to a column vector v in the W
// basis, in place: v <- B(z) v.
func (s *spectral) colBlock(v, z []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			v[k] *= z[k]
		case 1:
			zr, zi := z[k], z[k+1]
			a, b := v[k], v[k+1]
			v[k], v[k+1] = a*zr+b*zi, -a*zi+b*zr
			k++
		}
	}
}

// rowHat converts a row vector u = x W to the complex coordinates x V.
func (s *spectral) rowHat(u []float64) []complex128 {
	h := make([]complex128, s.n)
	s.rowHatTo(h, u)
	return h
}

func (s *spectral) rowHatTo(h []complex128, u []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			h[k] = complex(u[k], 0)
		case 1:
			h[k], h[k+1] = complex(u[k], u[k+1]), complex(u[k], -u[k+1])
		}
	}
}

// colHat converts a column vector v = W^{-1} b to V^{-1} b.
func (s *spectral) colHat(v []float64) []complex128 {
	h := make([]complex128, s.n)
	s.colHatTo(h, v)
	return h
}

func (s *spectral) colHatTo(h []complex128, v []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			h[k] = complex(v[k], 0)
		case 1:
			h[k], h[k+1] = complex(v[k]/2, -v[k+1]/2), complex(v[k]/2, v[k+1]/2)
		}
	}
}

// blockHat converts block coefficients to one complex value per column.
func (s *spectral) blockHatTo(h []complex128, z []float64) {
	for k := 0; k < s.n; k++ {
		switch s.kind[k] {
		case 0:
			h[k] = complex(z[k], 0)
		case 1:
			h[k], h[k+1] = complex(z[k], z[k+1]), complex(z[k], -z[k+1])
		}
	}
}

// rowTimes sets dst = x M for a row-major n x n matrix m.
func rowTimes(dst, x, m []float64, n int) {
	for j := range dst[:n] {
		dst[j] = 0
	}
	for i := 0; i < n; i++ {
		xi := x[i]
		if xi == 0 {
			continue
		}
		row := m[i*n : i*n+n]
		for j, v := range row {
			dst[j] += xi * v
		}
	}
}

// timesCol sets dst = M x for a row-major n x n matrix m.
func timesCol(dst, m, x []float64, n int) {
	for i := 0; i < n; i++ {
		row := m[i*n : i*n+n]
		s := 0.0
		for j, v := range row {
			s += v * x[j]
		}
		dst[i] = s
	}
}

// matrix writes W B(z) W^{-1} into dst.
func (s *spectral) matrix(dst *mat.Dense, z []float64) {
	n := s.n
	col := make([]float64, n)
	out := make([]float64, n)
	for j := 0; j < n; j++ {
		for k := 0; k < n; k++ {
			col[k] = s.wi[k*n+j]
		}
		s.colBlock(col, z)
		timesCol(out, s.w, col, n)
		for i := 0; i < n; i++ {
			dst.Set(i, j, out[i])
		}
	}
}

// Propagator evaluates exp(A t) and its integrals for many values of t
// for one square matrix A (typically D0, units 1/time, so t is a time).
// It is safe for concurrent use.
type Propagator struct {
	a      *mat.Dense
	n      int
	method ExpMethod // route in use (never ExpAuto)
	spec   *spectral // decomposition, when computed
}

// NewPropagator prepares exp(A t). With ExpAuto it decomposes A and keeps
// the spectral route when SpectralMaxCond and SpectralMinGap are met, and
// falls back to Pade otherwise (Method reports the route taken).
// ExpUniform requires A_ij >= 0 for i != j.
func NewPropagator(a mat.Matrix, m ExpMethod) (*Propagator, error) {
	r, c := a.Dims()
	if r != c || r == 0 {
		return nil, fmt.Errorf("likelihood: matrix exponential of a %dx%d matrix", r, c)
	}
	p := &Propagator{a: mat.DenseCopyOf(a), n: r, method: m}
	for i := 0; i < r; i++ {
		for j := 0; j < r; j++ {
			if x := p.a.At(i, j); math.IsNaN(x) || math.IsInf(x, 0) {
				return nil, fmt.Errorf("likelihood: matrix exponential: entry (%d,%d) is %v", i, j, x)
			}
		}
	}
	switch m {
	case ExpAuto, ExpSpectral:
		s, err := newSpectral(p.a)
		if err != nil {
			if m == ExpSpectral {
				return nil, fmt.Errorf("likelihood: spectral exponential: %w", err)
			}
			p.method = ExpPade
			return p, nil
		}
		p.spec = s
		if m == ExpAuto {
			p.method = ExpSpectral
			if !s.good() {
				p.method = ExpPade
			}
		}
	case ExpPade:
	case ExpUniform:
		for i := 0; i < r; i++ {
			for j := 0; j < r; j++ {
				if i != j && p.a.At(i, j) < 0 {
					return nil, fmt.Errorf("likelihood: uniformisation needs non-negative off-diagonal entries; A[%d][%d] = %g", i, j, p.a.At(i, j))
				}
			}
		}
	default:
		return nil, fmt.Errorf("likelihood: unknown exponential method %v", m)
	}
	return p, nil
}

// Method returns the route in use (after any automatic fallback).
func (p *Propagator) Method() ExpMethod { return p.method }

// Condition returns the 1-norm condition number of the column-normalised
// eigenvector matrix and the smallest relative eigenvalue gap
// min |l_i - l_j| / max(|l_i|, |l_j|), or NaN, NaN when A was not
// decomposed (ExpPade, ExpUniform).
func (p *Propagator) Condition() (cond, gap float64) {
	if p.spec == nil {
		return math.NaN(), math.NaN()
	}
	return p.spec.cond, p.spec.gap
}

// Exp writes exp(A t) into dst (n x n, allocated when empty). On the
// Pade route a t so large that A t would overflow is handled by halving
// and squaring (a sub-generator's exp(A t) underflows to 0 there); a
// non-finite result is an error, never a hang.
func (p *Propagator) Exp(dst *mat.Dense, t float64) error {
	if math.IsNaN(t) || math.IsInf(t, 0) {
		return fmt.Errorf("likelihood: exp(A t) at t = %v", t)
	}
	if dst.IsEmpty() {
		dst.ReuseAs(p.n, p.n)
	}
	switch p.method {
	case ExpSpectral:
		z := make([]float64, p.n)
		sh := math.Exp(p.spec.coefExact(t, z, nil))
		for i := range z {
			z[i] *= sh
		}
		p.spec.matrix(dst, z)
		return nil
	case ExpUniform:
		if t < 0 {
			return fmt.Errorf("likelihood: uniformisation needs t >= 0, got %v", t)
		}
		return expUniform(dst, p.a, t)
	}
	return expScaled(dst, p.a, t)
}

// Integral writes int_lo^hi exp(A s) ds into dst, for 0 <= lo <= hi.
// Spectral: V diag((e^{l hi} - e^{l lo})/l) V^{-1}, evaluated without
// cancellation through expm1 (and a series for |l (hi-lo)| < 0.5).
// Pade: exp(A lo) times the upper-right block of exp([[A, I], [0, 0]] w),
// w = hi - lo (Van Loan, IEEE TAC 23, 395 (1978)). Uniformisation:
// int_0^w e^{As} ds = sum_n (1/q) P(Pois(q w) > n) P^n on a short step,
// then doubling I(2w) = I(w) + e^{Aw} I(w).
func (p *Propagator) Integral(dst *mat.Dense, lo, hi float64) error {
	if !(lo >= 0 && hi >= lo) || math.IsInf(hi, 0) {
		return fmt.Errorf("likelihood: integral of exp(A s) over [%v, %v]", lo, hi)
	}
	if dst.IsEmpty() {
		dst.ReuseAs(p.n, p.n)
	}
	n := p.n
	switch p.method {
	case ExpSpectral:
		z := make([]float64, n)
		sh := math.Exp(p.spec.coefInterval(lo, hi, z, nil))
		for i := range z {
			z[i] *= sh
		}
		p.spec.matrix(dst, z)
		return nil
	case ExpUniform:
		var e0, i0 mat.Dense
		if err := expUniform(&e0, p.a, lo); err != nil {
			return err
		}
		if err := integralUniform(&i0, p.a, hi-lo); err != nil {
			return err
		}
		dst.Mul(&e0, &i0)
		return nil
	}
	big := mat.NewDense(2*n, 2*n, nil)
	w := hi - lo
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			big.Set(i, j, p.a.At(i, j)*w)
		}
		big.Set(i, n+i, w)
	}
	var eb, e0 mat.Dense
	if err := expScaled(&eb, big, 1); err != nil {
		return err
	}
	if err := expScaled(&e0, p.a, lo); err != nil {
		return err
	}
	dst.Mul(&e0, eb.Slice(0, n, n, 2*n))
	return nil
}

// uniformSetup returns q, P = I + A/q, and the number of doublings j
// such that q t / 2^j <= 1.
func uniformSetup(a *mat.Dense, t float64) (q float64, pm *mat.Dense, j int) {
	n, _ := a.Dims()
	for i := 0; i < n; i++ {
		q = math.Max(q, -a.At(i, i))
	}
	if q == 0 {
		return 0, nil, 0
	}
	pm = mat.NewDense(n, n, nil)
	pm.Scale(1/q, a)
	for i := 0; i < n; i++ {
		pm.Set(i, i, pm.At(i, i)+1)
	}
	// j from logarithms, so that q t may overflow (a huge t) without
	// making the halving loop run forever.
	if q*t > 1 {
		j = max(0, int(math.Ceil(math.Log2(q)+math.Log2(t))))
		for q*math.Ldexp(t, -j) > 1 {
			j++
		}
	}
	return q, pm, j
}

// uniformTerms is the number of Poisson terms kept for q t <= 1: the tail
// P(Pois(1) > 24) < 1e-25.
const uniformTerms = 25

// expUniform writes exp(A t) by uniformisation into dst.
func expUniform(dst *mat.Dense, a *mat.Dense, t float64) error {
	n, _ := a.Dims()
	q, pm, j := uniformSetup(a, t)
	if dst.IsEmpty() {
		dst.ReuseAs(n, n)
	}
	if t == 0 {
		dst.Zero()
		for i := 0; i < n; i++ {
			dst.Set(i, i, 1)
		}
		return nil
	}
	if q == 0 {
		// Zero diagonal: nothing to uniformise; Pade handles this corner.
		return expScaled(dst, a, t)
	}
	x := q * math.Ldexp(t, -j)
	pmf := math.Exp(-x)
	acc := mat.NewDense(n, n, nil)
	pow := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		pow.Set(i, i, 1)
	}
	var tmp mat.Dense
	for k := 0; k < uniformTerms; k++ {
		acc.Add(acc, scaled(pow, pmf))
		pmf *= x / float64(k+1)
		tmp.Mul(pow, pm)
		pow.Copy(&tmp)
	}
	for ; j > 0; j-- {
		tmp.Mul(acc, acc)
		acc.Copy(&tmp)
	}
	dst.Copy(acc)
	return nil
}

// integralUniform writes int_0^w exp(A s) ds by uniformisation into dst.
func integralUniform(dst *mat.Dense, a *mat.Dense, w float64) error {
	n, _ := a.Dims()
	q, pm, j := uniformSetup(a, w)
	if dst.IsEmpty() {
		dst.ReuseAs(n, n)
	}
	if q == 0 {
		return errors.New("likelihood: uniformisation integral of a matrix with zero diagonal")
	}
	x := q * math.Ldexp(w, -j)
	// pmf_k and tails P(Pois(x) > k), the tail summed from the far end.
	pmf := make([]float64, uniformTerms+1)
	pmf[0] = math.Exp(-x)
	for k := 1; k <= uniformTerms; k++ {
		pmf[k] = pmf[k-1] * x / float64(k)
	}
	tail := make([]float64, uniformTerms)
	s := 0.0
	for k := uniformTerms; k >= 1; k-- {
		s += pmf[k]
		tail[k-1] = s
	}
	e := mat.NewDense(n, n, nil)
	in := mat.NewDense(n, n, nil)
	pow := mat.NewDense(n, n, nil)
	for i := 0; i < n; i++ {
		pow.Set(i, i, 1)
	}
	var tmp mat.Dense
	for k := 0; k < uniformTerms; k++ {
		e.Add(e, scaled(pow, pmf[k]))
		in.Add(in, scaled(pow, tail[k]/q))
		tmp.Mul(pow, pm)
		pow.Copy(&tmp)
	}
	for ; j > 0; j-- {
		tmp.Mul(e, in)
		in.Add(in, &tmp)
		tmp.Mul(e, e)
		e.Copy(&tmp)
	}
	dst.Copy(in)
	return nil
}

func scaled(a *mat.Dense, f float64) *mat.Dense {
	var s mat.Dense
	s.Scale(f, a)
	return &s
}

// expScaled writes exp(a t) into dst by gonum's scaling and squaring
// (mat.Dense.Exp), guarded: a matrix or a time with a non-finite entry is
// an error (gonum would loop forever on an infinite norm), and when the
// 1-norm of a t would overflow, exp(a t/2^j) is computed and squared j
// times (for a sub-generator every power is bounded by 1, so the squaring
// cannot overflow). A non-finite result is an error.
func expScaled(dst *mat.Dense, a *mat.Dense, t float64) error {
	if math.IsNaN(t) || math.IsInf(t, 0) {
		return fmt.Errorf("likelihood: exp(A t) at t = %v", t)
	}
	r, c := a.Dims()
	if r != c {
		return fmt.Errorf("likelihood: exp of a %dx%d matrix", r, c)
	}
	if !allFinite(a.RawMatrix().Data) {
		return errors.New("likelihood: exp of a matrix with a non-finite entry")
	}
	n1 := mat.Norm(a, 1)
	if math.IsInf(n1, 0) {
		return errors.New("likelihood: exp of a matrix whose norm overflows")
	}
	j := 0
	for n1*math.Abs(t) > 1e300 {
		t = math.Ldexp(t, -1)
		j++
	}
	var at mat.Dense
	at.Scale(t, a)
	dst.Exp(&at)
	var tmp mat.Dense
	for ; j > 0; j-- {
		tmp.Mul(dst, dst)
		dst.Copy(&tmp)
	}
	if !allFinite(dst.RawMatrix().Data) {
		return errors.New("likelihood: exp(A t) overflows")
	}
	return nil
}

func allFinite(v []float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}
