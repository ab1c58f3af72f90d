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
