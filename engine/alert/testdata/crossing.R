# Reference values for forewarn/engine/alert: probability that a Gaussian
# forecast path crosses a threshold within a window.
#
# Generated with R 4.2.2 (stats::pnorm, stats::rnorm) and mvtnorm 1.1-3
# (pmvnorm, Genz-Bretz quasi-Monte Carlo algorithm; Genz 1992).
# Run from this directory:  Rscript crossing.R   (writes crossing.csv)
#
# Columns
#   name        case label
#   kind        rw   random walk with drift  x_t = x_{t-1} + a + e_t, e_t ~ N(0, sigma^2)
#                    mean_j = x0 + j a, var_j = j sigma^2, cov(i,j) = min(i,j) sigma^2
#               ar1  AR(1) about b:  x_t - b = a (x_{t-1} - b) + e_t
#                    mean_j = b + a^j (x0 - b),
#                    cov(i,j) = sigma^2 a^|i-j| (1 - a^(2 min(i,j))) / (1 - a^2)
#   x0, a, b, sigma   parameters above (b unused for rw)
#   threshold, direction (above|below), window k, horizon h
#   p_end       marginal probability at step k (pnorm)
#   p_genz      1 - P(all W_j on the safe side, j <= k)   (pmvnorm)
#   genz_err    error estimate reported by pmvnorm
#   p_sim       brute-force simulation of the same process, n_sim paths
#   sim_se      sqrt(p_sim (1 - p_sim) / n_sim)
#   n_sim       number of simulated paths
library(mvtnorm)
set.seed(20240605)

cases <- data.frame(
  name = c("rw_drift_up", "rw_drift_down_below", "rw_driftless", "rw_one_step",
           "rw_short_window", "ar1_above"),
  kind = c("rw", "rw", "rw", "rw", "rw", "ar1"),
  x0 = c(0, 100, 0, 0, 10, 56),
  a = c(0.5, -0.3, 0, 0.2, 1.0, 0.8),
  b = c(0, 0, 0, 0, 0, 50),
  sigma = c(1, 2, 1, 1, 3, 3),
  threshold = c(35, 85, 8, 1.5, 30, 62),
  direction = c("above", "below", "above", "above", "above", "above"),
  k = c(60, 40, 30, 1, 12, 24),
  h = c(60, 60, 30, 10, 60, 24),
  stringsAsFactors = FALSE)

moments <- function(cs, k) {
  j <- seq_len(k)
  if (cs$kind == "rw") {
    m <- cs$x0 + j * cs$a
    S <- outer(j, j, pmin) * cs$sigma^2
  } else {
    m <- cs$b + cs$a^j * (cs$x0 - cs$b)
    S <- outer(j, j, function(i, l) cs$sigma^2 * cs$a^abs(i - l) *
                 (1 - cs$a^(2 * pmin(i, l))) / (1 - cs$a^2))
  }
  list(m = m, S = S)
}

simulate <- function(cs, k, n) {
  x <- rep(cs$x0, n)
  crossed <- rep(FALSE, n)
  for (j in seq_len(k)) {
    e <- rnorm(n, 0, cs$sigma)
    if (cs$kind == "rw") x <- x + cs$a + e else x <- cs$b + cs$a * (x - cs$b) + e
    crossed <- crossed | (if (cs$direction == "above") x > cs$threshold else x < cs$threshold)
  }
  mean(crossed)
}

n_sim <- 1e6
out <- cases
out$p_end <- NA; out$p_genz <- NA; out$genz_err <- NA; out$p_sim <- NA; out$sim_se <- NA
out$n_sim <- n_sim
for (i in seq_len(nrow(cases))) {
  cs <- cases[i, ]
  k <- cs$k
  mo <- moments(cs, k)
  sd_k <- sqrt(mo$S[k, k])
  if (cs$direction == "above") {
    out$p_end[i] <- pnorm(cs$threshold, mo$m[k], sd_k, lower.tail = FALSE)
    safe <- pmvnorm(lower = rep(-Inf, k), upper = rep(cs$threshold, k), mean = mo$m,
                    sigma = mo$S, algorithm = GenzBretz(maxpts = 2e6, abseps = 1e-5))
  } else {
    out$p_end[i] <- pnorm(cs$threshold, mo$m[k], sd_k, lower.tail = TRUE)
    safe <- pmvnorm(lower = rep(cs$threshold, k), upper = rep(Inf, k), mean = mo$m,
                    sigma = mo$S, algorithm = GenzBretz(maxpts = 2e6, abseps = 1e-5))
  }
  out$p_genz[i] <- 1 - as.numeric(safe)
  out$genz_err[i] <- attr(safe, "error")
  p <- simulate(cs, k, n_sim)
  out$p_sim[i] <- p
  out$sim_se[i] <- sqrt(p * (1 - p) / n_sim)
}
write.csv(out, "crossing.csv", row.names = FALSE, quote = FALSE)
print(out)

# ---------------------------------------------------------------------------
# Part 2: seasonal ARIMA models, windows k = 120 and 360, state dimension up
# to 27 (forewarn's r + d + sD).  Writes crossing_arima.csv (one row per
# case), crossing_arima_series.csv (the simulated history each case filters)
# and crossing_arima_forecast.csv (R's forecasts from that history).
#
# For each case a history of n values is simulated from the model, R's
# stats::arima is run on it with every coefficient fixed (transform.pars =
# FALSE) and predict() gives the forecast means m_j (R's own Kalman filter,
# levels in the state).  The joint covariance of the forecast errors comes
# from the model alone, not from forewarn's code nor from R's filter: with
# psi_0 = 1, psi_i the MA(infinity) weights of the integrated process
# phi(B) Phi(B^s) (1-B)^d (1-B^s)^D y = theta(B) Theta(B^s) e (ARMAtoMA on
# the expanded polynomials),
#     Sigma_ij = sigma2 * sum_{l=0}^{min(i,j)-1} psi_{i-1-l} psi_{j-1-l},
# exact for a history long enough that the state is known (max_rel_se below
# reports how far R's predict() standard errors, rescaled to sigma2, are
# from sqrt(diag Sigma)).  p_genz = 1 - pmvnorm(safe side), Genz-Bretz,
# with its own error estimate genz_err.
#
# Columns of crossing_arima.csv:
#   name, p d q P D Q s (orders), ar1 ar2 ma1 ma2 sar1 sma1 (coefficients,
#   0 when absent), mean (process mean, d+D = 0), drift (slope per step,
#   time t = 1..n from the first value, d+D = 1), sigma2, n (history length),
#   threshold, direction, k (window = horizon), m_state (r + d + sD),
#   p_genz, genz_err, max_rel_se, genz_seconds
polymul <- function(a, b) {  # coefficient vectors in powers of B, constant first
  out <- rep(0, length(a) + length(b) - 1)
  for (i in seq_along(a)) out[i:(i + length(b) - 1)] <- out[i:(i + length(b) - 1)] + a[i] * b
  out
}
expand <- function(c1, c2, s, sign) {  # 1 + sign*sum c1 B^i times 1 + sign*sum c2 B^(s i)
  a <- c(1, sign * c1)
  b <- 1
  if (length(c2) > 0) { b <- rep(0, s * length(c2) + 1); b[1] <- 1; b[s * seq_along(c2) + 1] <- sign * c2 }
  polymul(a, b)
}
arima_cases <- data.frame(
  name = c("arima111_drift_k120", "arima112_sar6_k120", "sar24_mean_below_k120",
           "rw_drift_k360", "airline12_k360", "arima110_sma7_k360"),
  p = c(1, 1, 2, 0, 0, 1), d = c(1, 1, 0, 1, 1, 1), q = c(1, 2, 1, 0, 1, 0),
  P = c(0, 1, 1, 0, 0, 0), D = c(0, 0, 0, 0, 1, 1), Q = c(0, 0, 0, 0, 1, 1),
  s = c(0, 6, 24, 0, 12, 7),
  ar1 = c(0.5, 0.4, 0.5, 0, 0, 0.3), ar2 = c(0, 0, 0.2, 0, 0, 0),
  ma1 = c(-0.3, 0.2, 0.3, 0, -0.4, 0), ma2 = c(0, -0.3, 0, 0, 0, 0),
  sar1 = c(0, 0.5, 0.6, 0, 0, 0), sma1 = c(0, 0, 0, 0, -0.6, -0.5),
  mean = c(0, 0, 50, 0, 0, 0), drift = c(0.05, 0.02, 0, 0.03, 0, 0),
  sigma2 = c(1, 0.8, 1, 1, 0.5, 1), n = c(300, 300, 600, 300, 400, 400),
  zthr = c(0.9, 0.9, 1.6, 0.9, 0.2, 0.2),
  direction = c("above", "above", "below", "above", "above", "above"),
  k = c(120, 120, 120, 360, 360, 360), stringsAsFactors = FALSE)

set.seed(20250101)
rows <- list(); series <- list(); fcs <- list()
for (i in seq_len(nrow(arima_cases))) {
  cs <- arima_cases[i, ]
  ar <- if (cs$p == 2) c(cs$ar1, cs$ar2) else if (cs$p == 1) cs$ar1 else numeric(0)
  ma <- if (cs$q == 2) c(cs$ma1, cs$ma2) else if (cs$q == 1) cs$ma1 else numeric(0)
  sar <- if (cs$P == 1) cs$sar1 else numeric(0)
  sma <- if (cs$Q == 1) cs$sma1 else numeric(0)
  phiE <- -expand(ar, sar, cs$s, -1)[-1]   # expanded AR: 1 - sum phiE B^i
  thE <- expand(ma, sma, cs$s, 1)[-1]      # expanded MA: 1 + sum thE B^i
  burn <- 500
  w <- arima.sim(list(ar = if (length(phiE)) phiE else NULL, ma = if (length(thE)) thE else NULL),
                 n = cs$n + burn, sd = sqrt(cs$sigma2))[-(1:burn)]
  y <- w
  if (cs$D == 1) y <- diffinv(y, lag = cs$s)[-(1:cs$s)]
  if (cs$d == 1) y <- diffinv(y)[-1]
  y <- y + cs$mean + cs$drift * seq_len(cs$n) + if (cs$d + cs$D > 0) 100 else 0
  seas <- list(order = c(cs$P, cs$D, cs$Q), period = if (cs$s > 0) cs$s else NA)
  fixed <- c(ar, ma, sar, sma)
  k <- cs$k
  if (cs$drift != 0) {
    fit <- arima(y, order = c(cs$p, cs$d, cs$q), seasonal = seas, xreg = seq_len(cs$n),
                 fixed = c(fixed, cs$drift), transform.pars = FALSE, method = "ML")
    pr <- predict(fit, n.ahead = k, newxreg = cs$n + seq_len(k))
  } else {
    fit <- arima(y, order = c(cs$p, cs$d, cs$q), seasonal = seas, include.mean = cs$mean != 0,
                 fixed = if (cs$mean != 0) c(fixed, cs$mean) else fixed,
                 transform.pars = FALSE, method = "ML")
    pr <- predict(fit, n.ahead = k)
  }
  # psi weights of the integrated process
  diffP <- 1
  if (cs$d == 1) diffP <- polymul(diffP, c(1, -1))
  if (cs$D == 1) { b <- rep(0, cs$s + 1); b[1] <- 1; b[cs$s + 1] <- -1; diffP <- polymul(diffP, b) }
  phiStar <- -polymul(c(1, -phiE), diffP)[-1]
  psi <- c(1, ARMAtoMA(ar = phiStar, ma = thE, lag.max = k - 1))
  S <- matrix(0, k, k)
  for (a in 1:k) for (b in a:k) {
    l <- 0:(a - 1)
    S[a, b] <- cs$sigma2 * sum(psi[a - l] * psi[b - l])
    S[b, a] <- S[a, b]
  }
  m <- as.numeric(pr$pred)
  se_r <- as.numeric(pr$se) * sqrt(cs$sigma2 / fit$sigma2)
  max_rel_se <- max(abs(se_r - sqrt(diag(S))) / sqrt(diag(S)))
  sdk <- sqrt(diag(S))
  if (cs$direction == "above") {
    thr <- signif(max(m) + cs$zthr * max(sdk), 6)
    t0 <- proc.time()[["elapsed"]]
    safe <- pmvnorm(lower = rep(-Inf, k), upper = rep(thr, k), mean = m, sigma = S,
                    algorithm = GenzBretz(maxpts = 5e5, abseps = 1e-4))
  } else {
    thr <- signif(min(m) - cs$zthr * max(sdk), 6)
    t0 <- proc.time()[["elapsed"]]
    safe <- pmvnorm(lower = rep(thr, k), upper = rep(Inf, k), mean = m, sigma = S,
                    algorithm = GenzBretz(maxpts = 5e5, abseps = 1e-4))
  }
  secs <- proc.time()[["elapsed"]] - t0
  r <- max(cs$p + cs$s * cs$P, cs$q + cs$s * cs$Q + 1)
  rows[[i]] <- data.frame(cs[, c("name", "p", "d", "q", "P", "D", "Q", "s", "ar1", "ar2", "ma1", "ma2",
                                 "sar1", "sma1", "mean", "drift", "sigma2", "n")],
                          threshold = thr, direction = cs$direction, k = k,
                          m_state = r + cs$d + cs$s * cs$D,
                          p_genz = 1 - as.numeric(safe), genz_err = attr(safe, "error"),
                          max_rel_se = max_rel_se, genz_seconds = secs)
  series[[i]] <- data.frame(name = cs$name, t = seq_len(cs$n), y = y)
  fcs[[i]] <- data.frame(name = cs$name, j = seq_len(k), mean = m, se = se_r)
}
arima_out <- do.call(rbind, rows)
write.csv(arima_out, "crossing_arima.csv", row.names = FALSE, quote = FALSE)
write.csv(do.call(rbind, series), "crossing_arima_series.csv", row.names = FALSE, quote = FALSE)
write.csv(do.call(rbind, fcs), "crossing_arima_forecast.csv", row.names = FALSE, quote = FALSE)
print(arima_out)
