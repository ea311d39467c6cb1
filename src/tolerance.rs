//! Every numerical tolerance of the project, in one place.
//!
//! Solver settings first, then the tolerances the tests compare with.

/// Relative accuracy asked of every one-dimensional Brent root search, and
/// the rounding-level step (or bracket) that also stops the Newton searches
/// for τ² (REML/ML score, Paule–Mandel, Q-profile bounds): a few machine
/// epsilons.
pub const ROOT_REL: f64 = 4.0 * f64::EPSILON;

/// A Newton step on a τ² equation (the likelihood score, Q(τ²) = target)
/// of at most this share of τ², after steps that shrank quadratically
/// ([`NEWTON_SHRINK`]), ends the search: the error left after it is of the
/// order of the step squared (about 1e-20 relative), far below the
/// rounding of the function itself, where further steps only chase noise.
pub const NEWTON_STEP_REL: f64 = 1e-10;

/// That last step must be at most this share of the step before it.
pub const NEWTON_SHRINK: f64 = 1e-3;

/// With many studies (`model::near::FEWER_PASSES_MIN_ROWS`), a Newton fit
/// for the likelihood's maximum at most this share of τ² from the one
/// before also computes the log terms: after a step of 1e-7 the next is
/// of the order of 1e-14 (quadratic convergence), so that fit is usually
/// the last, and the likelihood at the root then needs no pass of its own
/// (a performance setting, not an accuracy one).
pub const NEWTON_NEAR_END_REL: f64 = 1e-7;

/// With many studies, when the search for the likelihood's maximum ends
/// with a step of at most this share of τ² from a fit that has its log
/// terms, that fit's τ² is the estimate instead of τ² plus the step: a
/// difference far below the 1e-10 to which results are compared, and of
/// the order by which only reordering the sums of a million studies moves
/// the estimate (up to 3e-14 relative, measured 2026-12-03, see
/// docs/performance.md).
pub const NEWTON_LAST_STEP_REL: f64 = 1e-13;

/// Iteration limit of each root search; Brent's method needs far fewer
/// (it converges superlinearly, and bisection alone halves a bracket 1,000
/// times long before that).
pub const ROOT_MAX_ITERS: u64 = 500;

/// A sum corrected from the residuals of earlier coefficients (the one-pass
/// fits of `model::near`: Q = Σw r₀² − δ'X'Wr₀, and Σw²r² likewise) is kept
/// only when the parts subtracted are at most this multiple of the result,
/// so at most two bits cancel; otherwise a second pass sums the residuals
/// at β̂.
pub const ONE_PASS_MAX_CANCEL: f64 = 4.0;

/// Intervals of the scan of the likelihood score over [0, hi] (so one more
/// point than this) that brackets the (restricted) likelihood's maxima
/// before the root search. A scan rather than one local search, so that a
/// second local maximum inside [0, hi] is found unless two sign changes
/// fall into one interval; a heuristic, not a guarantee.
pub const LIKELIHOOD_SCAN_POINTS: usize = 8;

/// When the score at τ² = 0 is not positive, the first scan interval is
/// also scanned at this many log-spaced points (one per decade below the
/// first quadratic point), where a second maximum close to 0 can hide.
pub const LIKELIHOOD_NEAR_ZERO_DECADES: usize = 6;

/// An OLS residual mean square below this share of the mean squared effect
/// is rounding, not variation: (4ε)², for residuals of a few ε·|y|.
pub const EXACT_FIT_REL: f64 = 16.0 * f64::EPSILON * f64::EPSILON;

/// A Knapp–Hartung residual Q at or below this share of Σ y_i²/(v_i + τ²)
/// is rounding of an exact fit, not residual variation: (8ε)², residuals of
/// a few ε·|y| with a margin of a few. Real residuals are many orders larger.
pub const KH_EXACT_FIT_REL: f64 = 64.0 * f64::EPSILON * f64::EPSILON;

/// A Knapp–Hartung factor s² counts as below 1 (and the floored answer is
/// shown beside the chosen one) only when s² < 1 − this: a factor of
/// 1 − 2ε from an exact fit on its boundary (for example when τ̂² makes
/// Q(τ̂²) = k − p exactly, as DL and PM do) is rounding, not agreement.
pub const KH_BELOW_ONE: f64 = 1e-9;

/// How many times the upper end of a τ² bracket may be doubled.
pub const BRACKET_DOUBLINGS: usize = 200;

/// A design column whose part not explained by the earlier columns has a
/// squared norm below this share of its own is treated as collinear.
pub const COLLINEAR: f64 = 1e-10;

/// A residual whose variance 1/w_i − x_i'M⁻¹x_i is below this share of the
/// study's total variance 1/w_i has no standardised residual (a study that
/// alone determines a coefficient).
pub const RESIDUAL_VARIANCE_FLOOR: f64 = 1e-12;

/// Above this many degrees of freedom the t distribution is replaced by the
/// normal: statrs 0.19's t quantiles lose accuracy there, and the 97.5%
/// points differ by about 2.4e-5 (1.2e-5 relative) at 1e5 df, less beyond.
pub const T_AS_NORMAL_DF: f64 = 1e5;

/// Iteration limit of the safeguarded Newton refinement of chi-square
/// quantiles (each step at least halves the bracket or converges quadratically).
pub const QUANTILE_MAX_ITERS: usize = 200;

/// Relative step below which that refinement stops.
pub const QUANTILE_REL_STEP: f64 = 2.0 * f64::EPSILON;

/// Test tolerance against independent reference libraries that compute the
/// same definitions in double precision (numpy/scipy/statsmodels): both sides
/// solve τ² to near machine precision, so 1e-9 relative leaves room only for
/// rounding in long sums and in the distribution functions.
pub const REFERENCE_REL: f64 = 1e-9;

/// Largest relative gap allowed between the range-to-SD divisor pondus uses,
/// 2Φ⁻¹((n − 0.375)/(n + 0.25)), and the exact expected range ξ(n) printed
/// in Wan et al. (2014) Table 1, for 10 ≤ n ≤ 50: the approximation's own
/// error there is at most 0.50% (n = 10), measured by
/// tests/reference/medians.py; below n = 10 it grows (1.4% at n = 5).
pub const WAN_RANGE_DIVISOR_REL: f64 = 0.0055;

/// Test tolerance against values published to 4 decimals: half a unit in
/// the last place, plus a little for the rounding of inputs.
pub const PUBLISHED_4DP: f64 = 6e-5;

/// Tolerance of exact identities checked in property tests.
pub const IDENTITY_REL: f64 = 1e-8;

/// Absolute floor of the reference comparisons, for values that are 0 or
/// nearly so (a coefficient near 0, τ² at the boundary).
pub const REFERENCE_ABS: f64 = 1e-10;

/// Absolute tolerance of a difference of two fitted values against the
/// reference (the influence view's shifts β̂₍₋ᵢ₎ − β̂, and the same over an
/// SE of about 0.05): each side carries up to [`REFERENCE_REL`] of an
/// estimate of order 1, so their difference carries up to about 2e-9, and
/// 20 times that after division by the SE.
pub const REFERENCE_SHIFT_ABS: f64 = 5e-8;

/// Relative tolerance for p-values against the reference (statrs' tails
/// carry about 3e-11 relative error; tiny p-values come from long tails).
pub const REFERENCE_P_REL: f64 = 1e-6;

/// The Poisson mixtures of the noncentral chi-square and F tails stop when
/// the Poisson mass not yet summed is below this (each omitted term is a
/// probability ≤ 1 times its Poisson weight, so this bounds the absolute
/// error of the tail).
pub const NONCENTRAL_TAIL_MASS: f64 = 1e-15;

/// Most Poisson terms those mixtures may sum before giving up (NaN); the
/// terms needed grow like √λ, so this allows λ far beyond any planning use.
pub const NONCENTRAL_MAX_TERMS: usize = 1_000_000;

/// Largest noncentrality the Poisson mixtures accept (NaN beyond): the
/// number of terms grows like √λ and the log Poisson weights lose accuracy
/// as λ grows; at λ = 1e6 they still agree with scipy to about 2e-10 (one
/// standard error is then a thousandth of the effect, far beyond planning).
pub const NONCENTRAL_LAMBDA_MAX: f64 = 1e6;

/// Test tolerance of the noncentral tails against scipy 1.16.3: both sides
/// are double-precision series, the central pieces (statrs' incomplete gamma
/// and beta) carry about 1e-12 to 1e-11 relative error.
pub const NONCENTRAL_REF_ABS: f64 = 1e-10;

/// Johnson–Neyman bounds: the quadratic coefficient b² − c²·v11 counts as 0
/// (one bound, a linear inequality) when it is below this fraction of
/// b² + c²·v11, i.e. when the slope's test statistic is within about 1e-12
/// (relative) of the critical value.
pub const JN_DEGENERATE: f64 = 1e-12;
/// A permuted statistic within this share of the observed one counts as at
/// least as extreme: arrangements that are the same up to symmetry give the
/// same statistic up to rounding in the refit.
pub const PERMUTATION_TIE_REL: f64 = 1e-10;

/// Most iterations of the trim-and-fill L0 estimate before it is declared
/// not to settle (it usually settles in a handful).
pub const TRIM_FILL_MAX_ITERS: usize = 100;

/// A row whose leverage hᵢ leaves 1 − hᵢ below this has leverage 1 in
/// floating point: it alone determines a coefficient and HC3, which divides
/// by (1 − hᵢ)², is undefined for its site (rounding in hᵢ is a few ε).
pub const LEVERAGE_ONE: f64 = 1e-10;

/// A site's x counts as constant for the one-stage model when its
/// Σ(x − x̄)² is at most n·(this·x̄)²: the spread of x is then below about
/// 1e-12 of its level, rounding rather than variation (a truly constant x
/// gives 0 exactly; the one-stage model needs every site's x to vary).
pub const ONE_STAGE_CONSTANT_X: f64 = 1e-12;

/// Test tolerance of the one-stage model (fixed effects, SEs, τ², σ² and
/// their profile intervals) against the dense-matrix numpy REML of
/// tests/reference/one_stage.py: that route stops scipy's bounded
/// minimiser on γ = τ²/σ² (accurate to about the square root of the
/// criterion's precision), so agreement is limited to a few parts in 1e7.
pub const ONE_STAGE_REF_REL: f64 = 1e-6;

/// Test tolerance of the one-stage model's fixed effects, τ² and σ²
/// against statsmodels 0.14.6 MixedLM (BFGS stopped at gtol 1e-8): observed
/// agreement is 1.5e-7 relative or better on the fixtures.
pub const ONE_STAGE_STATSMODELS_REL: f64 = 1e-5;

/// Test tolerance between the two routes to per-site effects (streaming
/// rows in Rust, aggregates in a SQL engine): both compute the same
/// moments in double precision by different stable algorithms.
pub const SQL_ROUTE_REL: f64 = 1e-9;

/// Test tolerance of the per-site OLS and HC3 against statsmodels on the
/// large-offset data (x, y around 1e9): the offset costs about 9 of the 16
/// digits of every value before any algorithm sees it, so agreement is
/// limited to about 1e-7 relative for both implementations.
pub const LARGE_OFFSET_REL: f64 = 1e-6;

/// A per-site residual sum of squares below this share of the outcome's
/// co-moment Σ(y − ȳ)² is rounding: RSS = Σ(y − ȳ)² − sᵀb is a difference
/// whose error is a few ε of Σ(y − ȳ)², so an exact fit shows up as
/// RSS ≈ 1e-16·Σ(y − ȳ)² rather than 0; such a slope has no standard error.
pub const EXACT_FIT_RSS: f64 = 64.0 * f64::EPSILON;

/// A numeric moderator with a value beyond this magnitude, or with a spread
/// below its reciprocal, is refused with a request to rescale it: its
/// coefficient's variance, which scales with 1/spread², would overflow or
/// underflow double precision (about 1e±308) in the fit.
pub const MODERATOR_MAGNITUDE: f64 = 1e100;

/// Relative tolerance of the one-dimensional Brent searches of the
/// three-level likelihood (boundary profiles, profile intervals), on √σ².
pub const MULTILEVEL_LINE_REL: f64 = 1e-10;

/// Absolute tolerance of those searches, as a share of the search range.
pub const MULTILEVEL_LINE_ABS: f64 = 1e-12;

/// Nelder–Mead stops when the standard deviation of the simplex's
/// objective values falls below this times (1 + |ℓ|) at the start (the
/// objective is a log-likelihood of order 1 to 1e4; parameters are then
/// accurate to about the square root of that).
pub const MULTILEVEL_NM_SD: f64 = 1e-13;

/// Iteration limit of each Nelder–Mead run.
pub const MULTILEVEL_NM_MAX_ITERS: u64 = 5_000;

/// An interior optimum of the three-level likelihood must beat the best
/// boundary by more than this share of (1 + |ℓ|) to count as interior.
pub const MULTILEVEL_BOUNDARY_LL: f64 = 1e-12;

/// Eigenvalues of the CR2 blocks below this share of the block's largest
/// are 0 (a cluster that alone determines a coefficient): generalised inverse.
pub const CR2_EIGEN_FLOOR: f64 = 1e-12;

/// Test tolerance of the three-level estimates against the direct scipy
/// maximisation: both sides stop an optimiser on the objective, so the
/// components agree to about the square root of the objective's accuracy.
pub const MULTILEVEL_REF_REL: f64 = 1e-5;

/// Cross-check of a row's routes (issue 15): two complete routes of one
/// `smd` row whose d values differ by more than this are reported as a
/// warning (a typing error in the extraction sheet, or a t from another
/// test). 0.05 in d is about the rounding of a t or a mean to two
/// significant digits in small studies; a rule of thumb, not a published value.
pub const ROUTE_CHECK_D: f64 = 0.05;

/// The same cross-check for `r` rows, on the correlation scale (rule of thumb).
pub const ROUTE_CHECK_R: f64 = 0.02;

/// Confidence limits count as clearly asymmetric about their effect when
/// the longer arm is more than this many times the shorter (limits rounded
/// to two decimals stay well inside it; ratio-scale limits of an odds ratio
/// of 0.6 (0.4, 0.9) give 1.5). A rule of thumb.
pub const CI_ASYMMETRY: f64 = 1.25;
/// The selection model's Newton search stops when the Newton decrement
/// ∇ℓ'(−H)⁻¹∇ℓ/2 (the rise in ℓ a full step would still bring) falls below
/// this; the estimates are then within about √(2·1e-12) ≈ 1.4e-6 standard
/// errors of the maximum.
pub const SELECTION_DECREMENT: f64 = 1e-12;

/// Iteration limit of that search (Newton converges in a few dozen steps
/// from the fit without selection).
pub const SELECTION_MAX_ITERS: usize = 200;

/// Relative step of the central differences of the analytic gradient that
/// give the selection model's Hessian: about the cube root of ε, where the
/// truncation (h²) and rounding (ε/h) errors balance.
pub const SELECTION_DIFF_STEP: f64 = 6e-6;

/// A log weight beyond ±this (a weight above about 1e6 or below 1e-6
/// relative to the first interval) means the weight runs off to 0 or
/// infinity: the data cannot fix it, and no number is reported.
pub const SELECTION_MAX_LOG_WEIGHT: f64 = 13.8;

/// Test tolerance of the selection model and PET/PEESE against the scipy
/// maximisation and statsmodels (the issue asks for agreement to 1e-4;
/// both sides stop optimisers, so agreement is about 1e-6).
pub const SELECTION_REF_ABS: f64 = 1e-4;

/// Test tolerance (absolute and relative) of `--shrink`, `--beyond`,
/// `--all-subsets` and the location-scale estimates against the independent
/// scipy/statsmodels script `tests/reference/heterogeneity.py`: both sides
/// stop an optimiser, so they agree to far better than this.
pub const HETEROGENEITY_REF: f64 = 1e-4;

/// Test tolerance of the location-scale α standard errors against the
/// reference: those rest on a numerical Hessian (central differences on
/// both sides, with different steps), accurate to a few digits.
pub const SPREAD_SE_REF: f64 = 1e-2;
