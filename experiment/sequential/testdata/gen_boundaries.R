# gen_boundaries.R writes boundaries.csv, the check table of package
# sequential, with R's rpact (group-sequential designs) and mvtnorm (the
# multivariate normal distribution). Debian packages: r-base-core,
# r-cran-rpact, r-cran-mvtnorm. Run from this directory:
#
#   Rscript gen_boundaries.R > boundaries.csv
#
# One row per look of each design. The columns sides, kind and alpha name
# the armtally design that must give the row's values (see the note on
# rpact's two-sided "asOF" below); fractions are the information fractions
# t_1;...;t_k as armtally takes them.
#   critical  rpact's critical value of the look (design$criticalValues)
#   spent     rpact's cumulative alpha spent (design$alphaSpent)
#   nominal   rpact's nominal level at the boundary (design$stageLevels,
#             one tail), doubled for a two-sided armtally design
#   h0_cross  the chance under H0 of first crossing at this look, from
#             mvtnorm::pmvnorm (Miwa's algorithm) with rpact's critical values, Z jointly
#             normal with Cov(Z_i, Z_j) = sqrt(t_i / t_j) (both tails when
#             two-sided); h0_err its error estimate
#   drift_upper, drift_lower  the same first-crossing chances of the upper
#             and lower boundaries when E[Z_j] = drift * sqrt(t_j);
#             drift_err the larger error estimate
#
# How the designs reach rpact: rpact wants informationRates ending at 1, so
# a schedule ending below 1 or beyond it (an overrun) is rescaled by its
# last fraction (the correlations depend only on ratios) and its spending
# given as "asUser" cumulative alphas computed here from the spending
# function at min(t, 1). armtally's two-sided O'Brien-Fleming-type design
# spends Lan and DeMets' 2 - 2 Phi(z_{1-alpha/2} / sqrt(t)) of the
# two-sided alpha, also given to rpact as "asUser". rpact's own two-sided
# "asOF" instead spends the one-sided form at alpha/2 in each tail; those
# rows are checked against armtally's one-sided design at alpha/2.
suppressPackageStartupMessages({
  library(rpact)
  library(mvtnorm)
})
set.seed(20261205)
cat(sprintf("# R %s.%s, rpact %s, mvtnorm %s\n", R.version$major, R.version$minor,
  packageVersion("rpact"), packageVersion("mvtnorm")))
cat("case,sides,kind,alpha,fractions,look,critical,spent,nominal,h0_cross,h0_err,drift,drift_upper,drift_lower,drift_err\n")

of <- function(alpha, t) ifelse(t >= 1, alpha, 2 - 2 * pnorm(qnorm(1 - alpha / 2) / sqrt(pmin(t, 1))))
pk <- function(alpha, t) alpha * log(1 + (exp(1) - 1) * pmin(t, 1))

# Miwa's algorithm is deterministic and, at these few dimensions, fast; its
# error is estimated by the change from 256 to 512 grid steps. (It stands
# in +/-1000 for infinite limits, which changes nothing here.)
prob <- function(lower, upper, mean, sigma) {
  p <- suppressWarnings(pmvnorm(lower = lower, upper = upper, mean = mean, sigma = sigma, algorithm = Miwa(steps = 512)))
  q <- suppressWarnings(pmvnorm(lower = lower, upper = upper, mean = mean, sigma = sigma, algorithm = Miwa(steps = 256)))
  c(p = as.numeric(p), err = max(abs(as.numeric(p) - as.numeric(q)), 1e-12))
}

# first crossing chances of the upper and lower boundaries at each look
crossing <- function(t, crit, sides, drift) {
  k <- length(t)
  sigma <- outer(t, t, function(a, b) sqrt(pmin(a, b) / pmax(a, b)))
  mu <- drift * sqrt(t)
  up <- lo <- err <- numeric(k)
  for (j in seq_len(k)) {
    s <- sigma[1:j, 1:j, drop = FALSE]
    m <- mu[1:j]
    l <- if (sides == 2) -crit else rep(-Inf, k)
    lower <- c(l[seq_len(j - 1)], crit[j])
    upper <- c(crit[seq_len(j - 1)], Inf)
    p <- prob(lower, upper, m, s)
    up[j] <- p[["p"]]; err[j] <- p[["err"]]
    if (sides == 2) {
      p <- prob(c(l[seq_len(j - 1)], -Inf), c(crit[seq_len(j - 1)], -crit[j]), m, s)
      lo[j] <- p[["p"]]; err[j] <- max(err[j], p[["err"]])
    }
  }
  list(up = up, lo = lo, err = err)
}

id <- 0
emit <- function(sides, kind, alpha, t, d, spentScale, nominalScale, drift) {
  id <<- id + 1
  crit <- d$criticalValues
  h0 <- crossing(t, crit, sides, 0)
  dr <- crossing(t, crit, sides, drift)
  for (j in seq_along(t)) {
    cat(sprintf("S-%03d,%d,%s,%.17g,%s,%d,%.17g,%.17g,%.17g,%.17g,%.3g,%.17g,%.17g,%.17g,%.3g\n",
      id, sides, kind, alpha, paste(sprintf("%.17g", t), collapse = ";"), j,
      crit[j], d$alphaSpent[j] * spentScale, d$stageLevels[j] * nominalScale,
      h0$up[j] + h0$lo[j], h0$err[j], drift, dr$up[j], dr$lo[j], dr$err[j]))
  }
}

# built-in spending on a schedule that ends at 1
builtin <- function(sides, kind, alpha, t, drift) {
  d <- getDesignGroupSequential(informationRates = t, alpha = alpha, sided = sides,
    typeOfDesign = if (kind == "OF") "asOF" else "asP")
  emit(sides, kind, alpha, t, d, 1, if (sides == 2) 2 else 1, drift)
}

# any schedule, the spending given as cumulative alphas; rpact wants the
# last of them to be its alpha, so a schedule that ends below 1 gives rpact
# the alpha spent by then (the boundaries depend on the cumulative alphas
# alone)
user <- function(sides, kind, alpha, t, drift) {
  a <- if (kind == "OF") of(alpha, t) else pk(alpha, t)
  a <- pmin(a, alpha)
  d <- getDesignGroupSequential(informationRates = t / t[length(t)], alpha = a[length(a)], sided = sides,
    typeOfDesign = "asUser", userAlphaSpending = a)
  emit(sides, kind, alpha, t, d, 1, if (sides == 2) 2 else 1, drift)
}

# rpact's two-sided asOF, checked against armtally's one-sided design at alpha/2
rpactTwoSidedOF <- function(alpha, t, drift) {
  d <- getDesignGroupSequential(informationRates = t, alpha = alpha, sided = 2, typeOfDesign = "asOF")
  id <<- id + 1
  crit <- d$criticalValues
  h0 <- crossing(t, crit, 1, 0)
  dr <- crossing(t, crit, 1, drift)
  for (j in seq_along(t)) {
    cat(sprintf("S-%03d,%d,%s,%.17g,%s,%d,%.17g,%.17g,%.17g,%.17g,%.3g,%.17g,%.17g,%.17g,%.3g\n",
      id, 1, "OF", alpha / 2, paste(sprintf("%.17g", t), collapse = ";"), j,
      crit[j], d$alphaSpent[j] / 2, d$stageLevels[j],
      h0$up[j], h0$err[j], drift, dr$up[j], 0, dr$err[j]))
  }
}

equal <- lapply(2:5, function(k) (1:k) / k)
uneven <- list(c(0.2, 0.45, 0.7, 1), c(0.1, 0.35, 1), c(0.5, 0.6, 0.75, 0.9, 1))

# Built-in spending: K = 2..5 equally spaced looks and uneven schedules,
# one-sided at 0.025, 0.05, 0.01, 0.1; Pocock-type two-sided at 0.05,
# 0.01, 0.1, 0.2.
for (t in c(equal, uneven)) {
  for (alpha in c(0.025, 0.05, 0.01, 0.1)) {
    builtin(1, "OF", alpha, t, 2.5)
    builtin(1, "P", alpha, t, 2.5)
  }
  for (alpha in c(0.05, 0.01, 0.1, 0.2)) builtin(2, "P", alpha, t, 2.5)
}
# Lan and DeMets' two-sided O'Brien-Fleming-type spending.
for (t in c(equal, uneven)) {
  for (alpha in c(0.05, 0.01, 0.1, 0.2)) user(2, "OF", alpha, t, 2.5)
}
# Schedules that end below 1 (the looks so far) or overrun it. (A second
# look beyond t = 1 has nothing left to spend; rpact keeps 1e-8 of alpha
# for its last look, so that case is checked in Go alone.)
for (t in list(c(0.25, 0.5), c(0.15, 0.4, 0.8), c(0.3, 0.6, 1.1), c(0.4, 0.8, 1.05))) {
  for (alpha in c(0.05, 0.025)) {
    for (sides in 1:2) {
      user(sides, "OF", alpha, t, 3)
      user(sides, "P", alpha, t, 3)
    }
  }
}
# rpact's two-sided asOF convention. It is one-sided spending at alpha/2
# in each tail; the two-sided boundaries also remove the paths that crossed
# the lower boundary, which at alpha = 0.05 moves the critical values by
# less than 1e-6 (at alpha = 0.2, by about 4e-6).
for (t in c(equal[c(1, 4)], uneven[1])) rpactTwoSidedOF(0.05, t, 2.5)
