// Package alert turns a Gaussian forecast into the probability that a
// series crosses a threshold within a window, finds the first step at which
// the median forecast is beyond the threshold (eta), and runs the
// hysteresis that decides when an alert rule is raised and cleared (the
// alarm states of ITU-T X.733).
//
// It is pure computation: no I/O, no goroutines, and it imports neither
// stream nor state. An Evaluator owns its workspaces and is not safe for
// concurrent use; keep one per worker. Probability does not allocate, on
// any path, nor does Decide once its workspace has grown to the largest
// state dimension seen (checked with testing.AllocsPerRun).
//
// # Scale
//
// Everything is on the model scale, where the forecast is Gaussian: the
// caller (series.Series.EvaluateAlerts) maps the raw threshold through the
// (monotone) transform and flips the direction if the transform is
// decreasing. A direction Below is
// handled as Above on −W with threshold −c (the covariance is unchanged),
// so below, W, c, m_j and v_j stand for the sign-adjusted quantities.
//
// # Formulas
//
// Let m_j, v_j be the forecast mean and variance of W_j = W_{t+j},
// j = 1..h, Σ the joint covariance of the h forecast errors, c the
// threshold, k ≤ h the window, and Q(z) = 1 − Φ(z) = ½·erfc(z/√2) the
// standard normal upper tail. The marginal probability of step j is
//
//	P_j = P(W_j > c) = Q((c − m_j)/√v_j)      (P_j = 1{m_j > c} if v_j = 0)
//
// Counter (Monotone): the series cannot fall back, so crossing within the
// window is the event W_k > c, and p = P_k exactly.
//
// Gauge: p = P(max_{j≤k} W_j > c) = 1 − P(W_j ≤ c for all j ≤ k), a
// k-dimensional Gaussian orthant probability. It is computed in this order,
// stopping at the first step that applies:
//
//  1. Window k = 1: p = P_1 exactly.
//
//  2. Skip. Boole's inequality (the union bound) gives
//     p ≤ Σ_{j≤k} P_j ≤ k·Q(z_min), z_min = min_{j≤k} (c − m_j)/√v_j.
//     If z_min ≥ Q⁻¹(Negligible/k) then the bound is ≤ Negligible (1e-6)
//     and min(Negligible, k·φ(z_min)/z_min) ≥ k·Q(z_min) is returned
//     (Gordon's inequality Q(z) < φ(z)/z, one exp instead of one erfc,
//     φ the standard normal density); neither Σ nor any P_j is evaluated, and
//     the covariance callback is not called. The test needs one
//     multiply-compare per step (d_j > 0 and d_j² ≥ Q⁻¹(Negligible/k)²·v_j with
//     d_j = c − m_j) and no allocation: about 0.2 µs of CPU for h = 60 on
//     the shared 2-core development machine (BenchmarkFarFromThreshold).
//
//  3. Bracket. max_j P_j ≤ p ≤ min(1, Σ_j P_j). If the bracket is at most
//     2·BracketTol wide, its midpoint is returned (error ≤ BracketTol = 1e-3,
//     deterministic).
//
//  4. Simulation. The leading k×k block of Σ is factored, Σ = L Lᵀ
//     (Cholesky, semi-definite allowed), and N paths W = m + L z,
//     z ~ N(0, I), are drawn from a PCG generator seeded by Query.Seed or,
//     when that is zero, by a hash of the query's values, so equal inputs
//     give equal results. With A = 1{max_j W_j > c} and the control variate
//     B = 1{W_{j*} > c}, j* = argmax_j P_j, whose mean P_{j*} is known
//     exactly, the estimate is
//
//     p̂ = Ā − β̂ (B̄ − P_{j*}),   β̂ = cov(A,B)/var(B) = (1 − Ā)/(1 − B̄)
//
//     (B = 1 implies A = 1, hence cov(A,B) = B̄(1 − Ā)). Its standard error
//     is SE = sqrt(var(A)(1 − ρ²)/N) ≤ sqrt(p(1 − p)/N) ≤ 0.5/√N, reported
//     by Evaluator.StdErr; β̂ is estimated from the same paths, which costs a
//     bias of order 1/N. With the default N = DefaultPaths = 10 000,
//     SE ≤ 0.005, so even the 95 % half-width 1.96·SE is below 1 %; the
//     fewest paths accepted, MinPaths = 2 500, still gives SE ≤ 1 %. The
//     estimate is clipped to the bracket of step 3. A path stops as soon as
//     it has crossed and reached step j*, so its cost is at most k(k+1)/2
//     multiply-adds.
//
// # Paths through the state space (Decide)
//
// Evaluator.Decide gives the same probability without the k×k covariance:
// after the shortcuts 1–3 it draws paths through the state recursion of
// the fitted model (StateSpace, filled from arima.Filter.PathSystem),
//
//	x_1 = X + σ L z  (σ²P = σ² L Lᵀ, one m×m Cholesky factor per call),
//	y_j = c + Z x_j,  x_{j+1} = T x_j + R η_j,  η_j ~ N(0, σ²),
//
// with T in companion (Harvey) form and the differencing integrated through
// explicit levels exactly as the filter forecasts, so a path costs
// O(k·(r + nnz(φ) + nnz(θ) + nnz(δ))) rather than O(k²) (Durbin & Koopman
// 2012, §4.9, §11.3). Each noise path e is used twice, W = m ± e
// (antithetic variates), with the control variate B of step 4
// (Glasserman 2004, §4.1–4.2). After every Batch = 32 paths a
// time-uniform confidence sequence for p (the normal-mixture boundary of
// Robbins 1970 with an estimated variance, Waudby-Smith et al. 2024),
// intersected with the bracket, is compared with the rule's levels; the
// simulation stops as soon as it lies above Raise, below Clear or between
// them, with error at most DecisionError = 1 % over all checks, or after
// Paths() paths. Given the rule's state (Rule.Current), only the level
// that can change it is tested: Raise for a cleared rule, Clear for a
// raised one, so a p near the other level stops as early
// (BenchmarkDecideK120NearClear). With Rule.Precision set (the daemon
// sets PrecisionSE = 0.01 and PrecisionDraws = PrecisionN, because it
// publishes the probability), the decision is always followed by fresh
// paths, as many as give the standard error Rule.precisionAt plans, and
// the probability is theirs: a
// probability left after the first batch decides the levels soundly but
// is too noisy to be read as a probability, and one from paths drawn
// until they look precise is biased (engine/series
// TestAlertReliabilityCalibrated). The seed derives from the query's values as in step 4.
// Measured on the shared 2-core machine, one core, k = 120, m = 8, p =
// 0.26 against Raise 0.9 / Clear 0.45: 0.30 ms and 256 paths
// (BenchmarkDecideK120); all 10 000 paths: 13 ms, against 37 ms for step 4
// on the same forecast (BenchmarkCholeskyK120).
//
// eta: the first step j ≤ h (the whole horizon, not only the window) with
// m_j > c. On the model scale the forecast is Gaussian, so its median is
// its mean, and a monotone transform maps medians to medians, so this is
// also the first step at which the raw-scale median is beyond the raw
// threshold. It is 0 when no step qualifies.
//
// # Hysteresis
//
// Next implements two levels, Raise and Clear < Raise (default
// Clear = Raise/2): a cleared rule is raised when p ≥ Raise, a raised rule
// is cleared when p < Clear.
//
// # Caveats
//
// The simulated probability is exact only up to its Monte Carlo error, and
// it is the probability under the fitted Gaussian model: parameter
// uncertainty and the discreteness of steps between buckets are not
// accounted for. The reflection principle (Bachelier 1900; Lévy 1948),
// P(max_{s≤t} B_s > c) = 2·P(B_t > c) for a driftless Brownian motion,
// overstates the discrete-step probability and serves in tests as an upper
// sanity bound only.
//
// References:
//   - Durbin, J. & Koopman, S. J. (2012). Time Series Analysis by State
//     Space Methods, 2nd ed., §4.9, §11.3 (simulation from the model).
//   - Robbins, H. (1970). Statistical methods related to the law of the
//     iterated logarithm. Ann. Math. Statist. 41(5), 1397–1409.
//   - Waudby-Smith, I., Arbour, D., Sinha, R., Kennedy, E. H. & Ramdas, A.
//     (2024). Time-uniform central limit theory and asymptotic confidence
//     sequences. Ann. Statist. 52(6).
//   - Boole, G. (1854). An Investigation of the Laws of Thought (the union
//     bound, Boole's inequality).
//   - Genz, A. (1992). Numerical computation of multivariate normal
//     probabilities. J. Computational and Graphical Statistics 1(2), 141–149
//     (the reference values in testdata come from its implementation in
//     R's mvtnorm::pmvnorm).
//   - Glasserman, P. (2004). Monte Carlo Methods in Financial Engineering,
//     §4.1 (control variates, the regression estimator β̂ = cov/var).
//   - ITU-T Recommendation X.733 (1992). Systems Management: Alarm
//     reporting function (the alarm states raised and cleared).
//   - Gordon, R. D. (1941). Values of Mills' ratio of area to bounding
//     ordinate and of the normal probability integral for large values of
//     the argument. Ann. Math. Statist. 12(3), 364–366.
//   - Golub, G. H. & Van Loan, C. F. (2013). Matrix Computations, 4th ed.,
//     §4.2 (Cholesky factorisation).
//   - Lévy, P. (1948). Processus stochastiques et mouvement brownien
//     (reflection principle); Bachelier, L. (1900). Théorie de la spéculation.
//   - O'Neill, M. E. (2014). PCG: a family of simple fast space-efficient
//     statistically good algorithms for random number generation (the
//     generator of math/rand/v2).
package alert
