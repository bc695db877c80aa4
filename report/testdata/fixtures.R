# Computes the numbers of the hand-made readouts in fixtures_test.go.
# Run: Rscript testdata/fixtures.R   (R 4.x, base stats only)
# The counts are invented; every derived number below was pasted into
# fixtures_test.go with 17 significant digits.

options(digits = 17)
alpha <- 0.05
level <- 0.95
zc <- qnorm(1 - alpha / 2)

wilson <- function(x, n) {
  p <- x / n
  z <- qnorm(1 - (1 - level) / 2)
  centre <- (p + z^2 / (2 * n)) / (1 + z^2 / n)
  half <- z / (1 + z^2 / n) * sqrt(p * (1 - p) / n + z^2 / (4 * n^2))
  c(centre - half, centre + half)
}

arm <- function(name, x, n) {
  w <- wilson(x, n)
  cat(sprintf("arm %s: x=%d n=%d rate=%.17g wilson=[%.17g, %.17g]\n", name, x, n, x / n, w[1], w[2]))
}

# Treatment arm 1 against control arm 2.
compare <- function(name, x1, n1, x2, n2, alternative = "two.sided") {
  p1 <- x1 / n1; p2 <- x2 / n2
  w1 <- wilson(x1, n1); w2 <- wilson(x2, n2)
  d <- p1 - p2
  # Newcombe (1998), method 10
  lo <- d - sqrt((p1 - w1[1])^2 + (w2[2] - p2)^2)
  hi <- d + sqrt((w1[2] - p1)^2 + (p2 - w2[1])^2)
  cat(sprintf("cmp %s: diff=%.17g newcombe=[%.17g, %.17g]\n", name, d, lo, hi))
  if (x1 > 0 && x2 > 0) {
    lr <- log(p1 / p2)
    se <- sqrt(1 / x1 - 1 / n1 + 1 / x2 - 1 / n2)
    cat(sprintf("  lift=%.17g katz=[%.17g, %.17g]\n", p1 / p2 - 1, exp(lr - zc * se) - 1, exp(lr + zc * se) - 1))
  }
  pp <- (x1 + x2) / (n1 + n2)
  z <- d / sqrt(pp * (1 - pp) * (1 / n1 + 1 / n2))
  pv <- switch(alternative,
    two.sided = 2 * pnorm(-abs(z)),
    greater = pnorm(z, lower.tail = FALSE),
    less = pnorm(z))
  crit <- if (alternative == "two.sided") zc else qnorm(1 - alpha)
  cat(sprintf("  z=%.17g crit=%.17g p=%.17g\n", z, crit, pv))
  f <- fisher.test(matrix(c(x1, n1 - x1, x2, n2 - x2), 2), alternative = alternative)
  cat(sprintf("  fisher p=%.17g\n", f$p.value))
}

target <- function(name, x, n, p0) {
  z <- (x / n - p0) / sqrt(p0 * (1 - p0) / n)
  cat(sprintf("tgt %s: z=%.17g p=%.17g binom p=%.17g n*p0=%.17g\n", name, z, 2 * pnorm(-abs(z)),
    binom.test(x, n, p0)$p.value, n * p0))
}

srm <- function(name, units, planned) {
  t <- chisq.test(units, p = planned)
  cat(sprintf("srm %s: stat=%.17g df=%d p=%.17g shares=%s\n", name, t$statistic, t$parameter, t$p.value,
    paste(sprintf("%.17g", units / sum(units)), collapse = ", ")))
}

cat("== two_arm: checkout-button-color\n")
srm("checkout", c(10112, 9988), c(0.5, 0.5))
arm("control purchase", 1089, 9900)
arm("green purchase", 1196, 9800)
compare("purchase", 1196, 9800, 1089, 9900)
arm("control signup", 2031, 10112)
arm("green signup", 2050, 9988)
compare("signup", 2050, 9988, 2031, 10112)

cat("== three_arm: onboarding-tour\n")
srm("onboarding", c(1050, 1020, 890), c(1, 1, 1) / 3)
arm("control activated", 315, 1050)
arm("short activated", 357, 1020)
arm("long activated", 298, 890)
compare("short activated", 357, 1020, 315, 1050)
compare("long activated", 298, 890, 315, 1050)
target("control activated", 315, 1050, 0.3)
target("short activated", 357, 1020, 0.3)
target("long activated", 298, 890, 0.3)
arm("control upgrade", 0, 1050)
arm("short upgrade", 6, 1020)
arm("long upgrade", 4, 890)
compare("short upgrade", 6, 1020, 0, 1050)
compare("long upgrade", 4, 890, 0, 1050)
target("control upgrade", 0, 1050, 0.002)
target("short upgrade", 6, 1020, 0.002)
target("long upgrade", 4, 890, 0.002)
