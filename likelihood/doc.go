// Package likelihood is the visible-transition likelihood engine: the
// generator split L = D0 + sum_l D_l, matrix exponentials, the exact
// log-likelihood of a data set and its exact gradient, and the predicted
// observables of a model (Predictor).
//
// # Units and conventions
//
// Rates are in 1/time and times in the same unit (the records' unit).
// Vectors over states are rows when they carry probability forward (alpha)
// and columns when they carry likelihood backward (beta). ln is the natural
// logarithm. For exact timestamps the likelihood is a density in
// (1/time)^(number of gaps); with frame-limited timestamps each gap
// contributes a probability instead.
//
// # Generator split and detection
//
// (D_l)_ij = p_l w_ij on every directed edge i->j that carries label l
// (detection probability p_l); D0 = L - sum_l D_l holds the hidden rates,
// the missed share (1 - p_l) w_ij of the visible ones and the diagonal
// -sum_j w_ij. After a detected event the instrument may be blind for a
// dead time delta, during which the chain runs under L and every event is
// lost. The factor of an event with label l after a gap tau is
//
//	M(tau) = exp(L delta) E(tau) D_l,   E(tau) = exp(D0 (tau - delta)),
//
// and a gap tau < delta is impossible (an error naming the record and the
// event). Without dead time exp(L delta) = I.
//
// Frame-limited timestamps (Instrument.Frame = F > 0): a reported gap g is
// taken to mean that the true gap lies in [max(g - F/2, 0), g + F/2], and
// E(tau) is replaced by the exact integral over that interval (shifted by
// the dead time and clipped at 0),
//
//	int_a^b exp(D0 s) ds = D0^{-1} (exp(D0 b) - exp(D0 a)).
//
// For timestamps that are frame starts, the reported gap g = mF says that
// the true gap lies in ((m-1)F, (m+1)F), with a triangular weight if the
// phase within the frame is uniform; the box [g - F/2, g + F/2] has the
// same centre, and the boxes of g = 0, F, 2F, ... tile [0, inf), so the
// probabilities of all possible reports sum to one. This is an
// approximation in two ways: the box replaces the triangular weight, and
// treating consecutive gaps as independent intervals ignores that two
// consecutive gaps share the phase of the event between them (their
// errors are anti-correlated). The approximation is good when F is small
// against the time scales of D0 and degrades as F grows.
//
// At the record's boundaries the same convention (timestamps are frame
// starts, the clock origin 0 is a frame start) gives: for a stationary
// start, the first event lies in [t_1, t_1 + F), and E(t_1) is the
// integral over that box, exactly; for a censored end (End exact), the
// last event lies in [t_n, t_n + F), and the censored interval is taken
// at its centre, End - t_n - F/2 (the survival at the mean instead of the
// mean survival, the same order of approximation as the gap boxes).
//
// # Log-likelihood
//
// A record with events (t_k, l_k), k = 1..n, contributes
//
//	L_r = alpha_1 M_2 M_3 ... M_n u,
//
// with u = 1, or, when Record.End is known, u = exp(L delta) exp(D0 T) 1
// with T = End - t_n - delta (End - t_n - F/2 - delta with frames) when
// T > 0, and u = 1 otherwise (no event can be detected while the
// instrument is dead). The start (Options.Start):
//
//   - StartFirstEvent (default): the record is conditioned on its first
//     event; alpha_1 = w0 D_{l_1} / (w0 D_{l_1} 1), w0 = nu exp(L delta)
//     (-D0)^{-1}, nu the stationary law of the post-event chain
//     K = exp(L delta) (-D0)^{-1} sum_l D_l (the state right after a
//     typical event). Without dead time w0 is proportional to pi, the
//     stationary law of L, so alpha_1 is proportional to pi D_{l_1}. The
//     first event's time and label then contribute nothing.
//   - StartStationary: the observation began at time 0 in the stationary
//     law pi with the instrument ready, and L_r = pi E(t_1) D_{l_1} M_2 ...
//     M_n u, E(t_1) without dead time (with frames, the integral over
//     [t_1, t_1 + F], see above): the density (probability) of the first
//     event is included.
//
// ln L is the sum over records. General path: the forward recursion
// alpha_k = alpha_{k-1} M_k, with alpha rescaled to sum 1 at every step and
// ln L accumulating the logs of the scale factors. Fast path (used
// automatically when every label sits on exactly one directed edge, or on
// parallel edges that all run from the same state to the same state, and
// the spectral route is in use, for any detection probability, dead time,
// frames, start or end): the state after each event is known, so
//
//	ln L_r = sum_k ln psi_{l_{k-1} -> l_k}(tau_k),
//	psi_{l->l'}(tau) = [exp(L delta) E(tau)]_{to(l), from(l')} p_{l'} w_{l'},
//
// (w_{l'} the summed rate of the label's parallel channels; a hidden
// channel parallel to a visible edge is part of D0 like any hidden edge)
// each term costing O(N) from a precomputed table (the product is kept as
// a mantissa and a power of two, so the loop takes no logarithm). The two
// paths agree where both apply (tested).
//
// Long gaps do not underflow on the spectral route: exp(D0 t) is evaluated
// as e^{lmax t} times W B(e^{(lambda - lmax) t}) W^{-1}, lmax the Perron
// (largest real) eigenvalue of D0, and lmax t is added to ln L directly.
//
// A spectral value is a sum of eigen-terms and is only absolutely
// accurate (error about eps cond(V) sum |terms|); a psi that is small at
// a short gap (a pair that needs several hidden steps) would lose its
// relative accuracy. So every spectral value (the fast path's pair factor;
// on the general path every entry of a propagated vector that the next
// factor reads, exact zeros of the D0 reachability pattern set to 0) is
// tested: if it is at most 1e-8 of the sum of its |terms|, that event is
// recomputed by uniformisation, whose terms are all non-negative, with the
// same shift; the value-only and gradient recursions make the same test,
// so they give the same ln L. The gradient takes the sensitivities of
// such an event from Van Loan blocks of the uniformisation factors (as on
// the dense route, below) instead of the eigen-coordinate sums, which
// would carry the same cancellation.
//
// Data labels are matched to model labels by name; a data label the model
// does not have is an error, and so is an event the model cannot produce
// (zero or negative density: the error names the record and the event), an
// empty record, a time that is not finite or decreases, and a non-finite
// result.
//
// Zero gaps. With exact timestamps (Frame = 0) an event at the same time
// as the previous event of its record is refused (ZeroGapError, naming the
// record and the event): a zero gap says only that the true gap was below
// the resolution of the times (an instrument's clock tick, or the float64
// spacing of a large time), and psi(0) is not the probability of that
// observation (it is 0 for most pairs, which would make ln L = -inf, and
// positive for others). Declaring the resolution as the frame length
// (Instrument.Frame) integrates psi over the frame interval instead, which
// is the likelihood of what was seen. The model-free statistics (package
// infer) keep such events in every count and leave zero gaps out of the
// gap-shape statistics, saying how many.
//
// # Matrix exponentials
//
// Propagator evaluates exp(A t) and int_lo^hi exp(A s) ds by one of three
// independent routes (ExpMethod):
//
//   - spectral: D0 = V diag(lambda) V^{-1} once per parameter vector
//     (gonum mat.Eigen; complex pairs kept as real 2x2 rotation blocks, so
//     products stay real), then O(N^2) per vector product and O(N) per
//     psi value;
//   - Pade: scaling and squaring (gonum mat.Dense.Exp), O(N^3) per value,
//     integrals by Van Loan's block exponential;
//   - uniformisation: sum_n Pois(n; q t) (I + A/q)^n on a step with
//     q t <= 1, then squaring; all terms non-negative for a sub-generator.
//
// The fallback rule (ExpAuto, the default): the spectral route is kept
// when cond_1(V) <= SpectralMaxCond = 1e6 (V with unit columns) and every
// pair of eigenvalues is separated by at least SpectralMinGap = 1e-6
// relative; otherwise the Pade route is used, and the general path with
// it (a defective D0, such as an irreversible ring with equal rates, or a
// D0 with repeated eigenvalues). Distinct intervals are evaluated once
// where that pays: the Pade route (O(N^3) per interval) caches
// exponentials by exact interval value, and the spectral route caches the
// coefficients of frame intervals (N complex exponentials each; camera
// data repeat a few values), both in bounded per-goroutine caches. For
// exact timestamps the spectral route evaluates N scalar exponentials per
// event, which costs no more than a cache lookup, and does not cache.
//
// The Pade (and uniformisation) route shifts likewise, exp(D0 t) =
// e^{s t} exp((D0 - s I) t) with s the largest real part of D0's computed
// eigenvalues, and s t is added to ln L; a frame interval is evaluated as
// int_lo^hi exp(D0 u) du = e^{s lo} exp((D0 - s I) lo) int_0^w exp(D0 u) du
// (w = hi - lo), both factors bounded, so frames far out neither underflow
// nor lose digits in the subnormal range. Its gradient is split the same
// way, d[e^{D0 lo} I(w)] = (d e^{D0 lo}) I(w) + e^{D0 lo} dI(w), into a Van
// Loan block on D0 - s I over [0, lo] and one on D0 over the box [0, w],
// both with bounded sums. Every matrix exponential goes through a guard:
// a non-finite entry is an error, and a time so large that A t would
// overflow is handled by halving and squaring.
//
// # Gradient
//
// Evaluator.Gradient returns d ln L / d ln w for every directed edge (index
// 2*edge + direction, as in models.Network.Edges) and d ln L / d p_l for
// every label, exactly (reverse mode; finite differences are only a test
// oracle). With normalised forward vectors alpha and backward vectors beta
// around an event, c = alpha M beta, the sensitivities are
//
//	d ln L = sum_events [alpha dG E D beta + (alpha G) dE (D beta) + (alpha G E) dD beta] / c
//
// plus the start and end terms. The middle term is Fisher's identity in
// matrix form: d ln L / d (D0)_ij = sum_events K_ij / c with
//
//	K = int_0^tau (a^T exp(D0 s))^T (exp(D0 (tau - s)) b)^T ds
//	  = V^{-T} [(V^T a)(V^{-1} b)^T o Phi(tau)] V^T,
//	Phi_kl = (e^{lambda_k tau} - e^{lambda_l tau}) / (lambda_k - lambda_l),  Phi_kk = tau e^{lambda_k tau},
//
// (the expected number of D0 jumps i->j and, on the diagonal, the expected
// time in state i, given the data), a = (alpha G)^T, b = D beta. Phi is
// linear in the exponentials, so the sums over events are accumulated in
// eigen coordinates and Phi's divided differences are taken once at the
// end: O(N^2) per event on the general path, O(N) on the fast path. For a
// frame interval, Phi is integrated over [lo, hi] (same form with
// int e^{lambda s} ds and int s e^{lambda s} ds). On the Pade route K comes
// from Van Loan's block exponential exp([[D0^T, X], [0, D0^T]] tau) (a 3x3
// block form for the box [0, w] of a frame interval, see above), summed
// per distinct interval. The dead
// time term uses the same block exponential once, with L. The start law
// w0 = nu G A is differentiated through dnu = nu dK (I - K + 1 nu)^{-1} and
// dA = A dD0 A, and pi through dpi = -(pi dL) (L - 1 pi)^{-1}. The backward
// vectors of a record are stored only every 512 steps and recomputed per
// segment, so the gradient needs O(N (n/512 + 512)) memory per record of n
// events rather than O(N n). Model-level
// gradients (ModelLogLikGrad) follow by the chain rule through
// models.Model.Jacobian.
//
// # Predicted observables
//
// A Predictor (NewPredictor) computes what a model predicts for data taken
// through the same detection process: per-label detection probabilities
// from the kernels and a dead time delta from the Instrument. After a
// detected event the chain evolves under L for delta (events lost), then
// under D0 until the next detected event, so the post-event kernels are
//
//	M_l = exp(L delta) (-D0)^{-1} D_l
//
// and the detected events form a Markov renewal process. (-D0)^{-1} is
// computed by an elimination that only adds and multiplies non-negative
// numbers, like the stationary-law reduction, so F keeps machine precision
// for rates spread over many decades. From these come the embedded visible
// chain P(l'|l) = alpha_l M_l' 1 (alpha_l the stationary post-l state law),
// the stationary label law, the inter-transition densities psi_{l->l'}(t)
// and their moments int t^k psi dt in closed form, the effective affinity
// F = ln[P(+|+)/P(-|-)] (+-Inf when a one-way edge makes a probability 0),
// the visible current J and its diffusion coefficient D (Var c(t) ~ 2 D t;
// exact, from the derivatives of the scaled cumulant generating function
// lambda(s), with or without dead time), lambda(s) itself (lambda(-F) = 0
// for single-edge labels), the exact count-stopped law P_n(c) over windows
// of n consecutive detected events by dynamic programming over (post-event
// state, c): raw, split by first and last label, or post-selected so that
// the first label is the reverse of the last, in which case
// ln[P_n(c)/P_n(-c)] = F c exactly for a Markov label sequence; and, for
// contrast, the exact law of c at a fixed clock time t from a stationary
// start (uniformisation). Rates are in 1/time, times in the record's unit,
// affinities in k_B T.
//
// A dead time breaks time-reversal symmetry (the instrument is blind after
// an event, not before), so a network at detailed balance seen through a
// dead time can show F != 0 and J != 0. So can unequal detection
// probabilities of the two directions of the visible edge (the recorded
// process is then the coarse-graining of a chain with entropy production
// sigma + J ln(p_+/p_-), not sigma); missed events detected alike in both
// directions keep F = J = 0.
//
// # Probability integral transform
//
// Evaluator.PIT gives, for every gap, the model's distribution function of
// the gap given everything recorded before it and the label that ends it,
// evaluated at the gap, from the same filtered law as the forward
// recursion:
//
//	u = alpha G [int_0^{tau - delta} exp(D0 s) ds] D_{l'} 1 / alpha G (-D0)^{-1} D_{l'} 1,
//
// G = exp(L delta); for single-edge labels without dead time
// [int_0^tau exp(D0 s) ds]_{to(l), from(l')} / [(-D0)^{-1}]_{to(l), from(l')}.
// Under the model the u's are independent and uniform (a Rosenblatt
// transform); with frame-limited timestamps the transform is randomised
// within the frame's box, from a seed. See pit.go.
//
// # Parallelism and determinism
//
// The data are cut into work items by a rule that depends on the data only
// (whole records on the general path, grouped to about 2^15 events; on the
// fast path long records are also split, since each pair factor is
// independent). Options.Workers goroutines evaluate the items and the
// per-item sums are added in item order, so the result is bit-identical
// for every number of workers.
//
// # Files
//
// kernel.go builds the generator split; expm.go the three exponential
// routes; evaluator.go builds an Evaluator (options, start law, dense
// shift); run.go cuts the data into work items and drives an evaluation;
// fastpath.go is the single-edge fast path (pair factors psi); general.go
// the forward recursion on state vectors; accuracy.go the entry-wise
// accuracy checks and the uniformisation fallback of the spectral route;
// gradient.go the exact gradient; pit.go the probability integral
// transform of the gaps; observables.go, countstop.go and fixedtime.go the
// predicted observables.
package likelihood
