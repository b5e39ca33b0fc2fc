// Package infer turns records of visible transitions into statistics,
// tests and fits. This file documents the data side: reading records,
// model-free summaries, and the checks of the assumptions behind a
// single-visible-edge analysis.
//
// # Records
//
// ReadRecords and ReadFile read CSV or TSV text with a header naming the
// columns time and label (and optionally record) in any order, or a state
// trace with columns time and state, into a likelihood.Data (9 bytes per
// event). Rows of a record are contiguous; a row labelled "end" gives the
// record's end time. Every problem is a *ReadError naming file, line and
// column. WriteRecords writes data back so that reading it again gives the
// same values bit for bit.
//
// Degenerate and hostile input is refused, not turned into numbers: times
// outside the working range (|t| <= MaxTime = 1e150, positive gaps >=
// MinGap = 1e-150: the statistics square and multiply times and rates),
// subnormal times, distinct decimals that are one float64 (times beyond
// double precision), UTF-16 text, labels and state names over 100 bytes,
// record IDs over 256, lines over 1 MiB. Messages repeat at most 40 bytes
// of any input. CheckTimes makes the same time checks, by record and
// event, for data built in code; the statistics call it first.
//
// Zero gaps (an event at the time of the previous one: the gap is below
// the resolution of the times) are kept: they count in every statistic of
// the label sequence (counts, P(l'|l), F, J, the windows of the
// fluctuation test), the waiting-time divergences leave them out, the shape
// test flags them as ties, and the exact-time likelihood refuses them
// (likelihood.ZeroGapError; a frame of the clock's resolution integrates
// over them instead). The report says how many and where the first is
// (ReadReport.ZeroGaps, Locate).
//
// # Summary
//
// Summarize gives, pooled over records and per record, for labels l, l'
// and a visible edge with forward label + and backward label -:
//
//	duration T      = sum over records of (end - t_1)   (end = last event if unknown)
//	rate(l)         = n_l / T                            (n_l: l events after each t_1)
//	J               = (n_+ - n_-) / T,  activity = (n_+ + n_-) / T
//	P(l'|l)         = N_{ll'} / N_{l.}                   (consecutive pairs in a record)
//	F               = ln[ P(+|+) / P(-|-) ]              (k_B T)
//
// with Clopper-Pearson intervals for P(l'|l): the k-out-of-n interval
// [B^{-1}(a/2; k, n-k+1), B^{-1}(1-a/2; k+1, n-k)] (B^{-1} the Beta
// quantile, a = 1 - level). The standard error of F is the delta-method one,
//
//	Var(F) ~ 1/N_{++} - 1/N_{+.} + 1/N_{--} - 1/N_{-.},
//
// so the rarest pair dominates. EffectiveAffinity can also bootstrap: over
// records when there are many, else over contiguous blocks of event pairs
// (a seed fixes the result). When a pair was never seen the plug-in F is
// infinite; the estimate then carries the one-sided bound that the
// Clopper-Pearson limits of P(+|+) and P(-|-) support.
//
// The current's diffusion coefficient D (1/time) is half the long-time
// slope of Var c(t) ~ a + 2 D t, c(t) = n_+ - n_- over a window of duration
// t, fitted by weighted least squares at the four longest of the window
// durations t_max 2^-j (diffusion.go). A single window length would give
// s^2/(2t) = D + a/(2t), biased by the window's boundary offset a.
// Summarize and EntropyBounds share this estimator and its blocks, so both
// give the same D and interval for the same data.
//
// Intervals of rates, J, the activity and D: a delete-one-block jackknife
// over blocks of t_max (32 mean gaps or more) with a Student t quantile on
// blocks - 1 degrees of freedom, on log scale for the positive rates and
// D. It draws no random numbers. Measured by simulation (coverage_test.go)
// it keeps its level where the percentile block bootstrap used before
// covered 91-93%. With fewer than 10 blocks J and D are withheld ("too few
// events", Estimate.Undefined) and a rate takes the exact Poisson interval
// of Garwood (Biometrika 28, 437 (1936)), never negative and never of zero
// width, which assumes Poisson counting and says so: the events of a
// hidden network are not Poisson, and with many events the Garwood
// interval of the activity covered only 83-91% on three of the shipped
// models. The Fano factor Var c(t)/|mean c(t)| is given at one stated
// window length (50 events on average by default), offset included; it
// tends to the randomness parameter 2 D / |J| for windows much longer than
// the labels' memory.
//
// Inter-transition times are summarised per pair (l, l'): count, mean,
// median and coefficient of variation of the times from an l event to the
// next event when that is l'.
//
// # Tests
//
// ShapeTest compares the ++ and -- gap distributions after dividing each by
// its mean (two-sample Kolmogorov-Smirnov, exact for small samples). If
// every driven cycle passes through the visible edge and detection is
// perfect, psi_{+->+}(t) / psi_{-->-}(t) = e^F for all t and the shapes are
// equal; a difference rules all such schemes out.
//
// MarkovOrderTest is the likelihood-ratio test of first- against
// second-order dependence of the labels (Anderson and Goodman 1957):
//
//	G = 2 sum_ijk n_ijk ln[ n_ijk n_.j. / (n_ij. n_.jk) ] ~ chi2( sum_j (r_j - 1)(c_j - 1) ).
//
// Labels on single directed edges stay first-order Markov with any
// detection probability, so a rejection means spurious events, labels
// shared by several edges, or hidden memory.
//
// StationarityTest compares P(l'|l) (G test of homogeneity) and the mean
// gap (Welch's z) between the halves of each record, and both between
// records (G test; Cochran's Q for the means).
//
// # Honest at the edges
//
// BoundsValid (validity.go) is the one rule that says whether the
// model-free entropy-production lower bounds (F*J, J^2/D, the
// waiting-time bound) may be stated: not when a label may sit on several
// edges, + and - are detected unequally, or there is a dead time, nor when
// the data's Markov-order test rejects at MarkovWithholdLevel = 0.001;
// otherwise with the test's p beside them. The intervals of F*J and J^2/D
// are ranges over joint ellipses of their factors (boundinterval.go), which
// keep their level at equilibrium, where both are 0.
//
// Small counts (smallcount.go): BinomialTest is the exact binomial test of
// a count against a model's probability, AffinityTest the exact
// likelihood-ratio test of F against a model's; both report a p-value and
// a normal score that stays finite with zero counts.
//
// Every test returns its own p-value. The checks of one report form a
// family corrected by Holm's step-down procedure (checks.go; Holm, Scand.
// J. Stat. 6, 65 (1979)): a rejection is evidence against the check's
// null hypothesis at the family-wise level, not a fact. The estimates
// assume the records are stationary and come from one process.
//
// # Candidates and goodness of fit
//
// Families generates candidate networks around one visible edge without
// spec files (families.go): rings, rings with one chord, rings with a side
// loop, linear chains, and the exhaustive enumeration of every connected
// topology of up to 5 states that contains the visible edge, up to the
// isomorphisms that keep the edge and its direction (enumerate.go: 1, 3,
// 15, 95 topologies on 2..5 states). TightCoupling imposes one known
// affinity on every cycle that crosses the visible edge forward
// (tightcoupling.go). GapGoodness tests a model's probability integral
// transforms of the gaps for uniformity with the one-sample
// Kolmogorov-Smirnov and Anderson-Darling tests (goodness.go,
// onesample.go); with parameters fitted to the same data the test is
// conservative (see goodness.go).
//
// # Fitting
//
// Fit maximises the exact log-likelihood (package likelihood) over a
// model's free parameters. The optimiser works in unconstrained
// coordinates u: a rate with no upper bound is x = lo + exp(c + A
// tanh((u - c)/A)), A = 46 (every trial step keeps the rate within e^46 of
// its start, and near the start the map is ln x = u), and a rate with an
// upper bound or a detection probability is x = lo + (hi - lo)/(1 + e^-u);
// bounds are never crossed, ties and affinity constraints hold exactly
// (models.Model.Network). Each start runs BFGS (gonum/optimize, More-Thuente
// line search) on -ln L/n with the exact gradient, to |d ln L/du| <=
// 1e-4 sqrt(n) (n gaps). Starts: the spec's values, a copy scaled to the
// data's mean gap, data-informed starts (the best of 48 random draws by the
// distance of their P(l'|l) to the data's) and random ones (log-normal,
// factor 4.5 at one SD); the seed fixes them. With more than twice
// ExploreGaps gaps the starts run on an exploration subsample (blocks
// spread evenly over the records), the ends are grouped into distinct
// optima (ln L within 0.01 nats), and each is refined on all the data by
// BFGS preconditioned with the subsample's curvature (a few steps). The
// observed information I = -d^2 ln L/dw dw^T (w = ln rate, logit p) comes
// from central differences of the exact gradient; its eigen-directions
// below max(1e-7 lambda_max, 1/10^2) are flat (a standard error above e^10
// is no determination), named in the parameters (identifiability.go), and
// left out of the effective number of parameters k that AIC, AICc and BIC
// use, except the direction of a rate running to zero (it still counts).
// Profile-likelihood intervals (profile.go; Venzon and Moolgavkar, Appl.
// Stat. 37, 87 (1988)) follow the signed root deviance by secant steps,
// each point a constrained BFGS; a side that never reaches the chi-square
// threshold is open. DerivedQuantities carries the exact sensitivities of
// sigma, F, J, the cycle affinities, the edge currents and the mean gaps
// through I^-1 (delta method); BootstrapFit refits simulated data sets.
//
// # Ranking
//
// Compare fits every candidate and holds it against the records' own
// Evidence (F, shape test, Markov order, valid entropy bounds, count-stopped
// windows): CheckConsistency makes one Holm family per candidate (gap
// goodness of fit, F by the exact likelihood-ratio test, P_n(c) G-tests,
// sigma against the valid bound, a known force) and applies the structural
// rules (shape: the data's psi(++) and psi(--) differ while the model's
// ratio is constant in t; Markov order: the labels are not first order
// while each of the model's labels sits on one directed edge). A scheme
// that cannot produce a label pair of the records is ruled out without a
// fit (ImpossibleError). Candidates are ranked by BIC; NestedTests tests
// nested pairs by the likelihood ratio, with the chi-bar-square mixture
// when rates are tested at zero (Self and Liang, JASA 82, 605 (1987)). A
// consistent candidate is not thereby true, nor the only one.
//
// # Least dissipation within a scheme
//
// ProfileQuantity gives the profile likelihood of a derived quantity q of a
// fitted model (sigma, F under the instrument, a cycle affinity),
//
//	ln L_p(s) = max { ln L(theta) : q(theta) = s },
//
// and its interval {s : 2 [ln L_max - ln L_p(s)] <= chi2_1 quantile}. The
// lower end for sigma is the least dissipation the data do not reject
// within the scheme; when the scheme's best equilibrium member (every cycle
// affinity 0) is not rejected it is 0, and the data do not prove that the
// system is driven. Affinities are held exactly by affinity constraints on
// a copy of the model; sigma and F by an augmented Lagrangian with the
// exact gradients of the sensitivity packages (leastsigma.go,
// lagrangian.go, affinityroute.go).
package infer
