# Computes the numbers of the hand-made readouts in fixtures_test.go.
# Run: Rscript testdata/fixtures.R   (R 4.x, base stats only)
# The counts are invented; every derived number below was pasted into
# fixtures_test.go with 17 significant digits, and the comment beside each
# value there names the call of this script that printed it.

options(digits = 17)
alpha <- 0.05

# z_{1 - (1 - level) / 2}, the critical value of a two-sided interval.
zlevel <- function(level) qnorm(1 - (1 - level) / 2)

wilson <- function(x, n, level = 0.95) {
  p <- x / n
  z <- zlevel(level)
  centre <- (p + z^2 / (2 * n)) / (1 + z^2 / n)
  half <- z / (1 + z^2 / n) * sqrt(p * (1 - p) / n + z^2 / (4 * n^2))
  c(centre - half, centre + half)
}

# Newcombe (1998), method 10: the hybrid score interval of p1 - p2.
newcombe <- function(x1, n1, x2, n2, level = 0.95) {
  p1 <- x1 / n1; p2 <- x2 / n2
  w1 <- wilson(x1, n1, level); w2 <- wilson(x2, n2, level)
  d <- p1 - p2
  c(d - sqrt((p1 - w1[1])^2 + (w2[2] - p2)^2), d + sqrt((w1[2] - p1)^2 + (p2 - w2[1])^2))
}

arm <- function(name, x, n, level = 0.95) {
  w <- wilson(x, n, level)
  cat(sprintf("arm %s: x=%d n=%d rate=%.17g wilson=[%.17g, %.17g]\n", name, x, n, x / n, w[1], w[2]))
}

# Treatment arm 1 against control arm 2. Returns the p-values of the z test
# and of Fisher's exact test, for p.adjust.
compare <- function(name, x1, n1, x2, n2, alternative = "two.sided", level = 0.95) {
  p1 <- x1 / n1; p2 <- x2 / n2
  d <- p1 - p2
  nc <- newcombe(x1, n1, x2, n2, level)
  cat(sprintf("cmp %s: diff=%.17g newcombe=[%.17g, %.17g]\n", name, d, nc[1], nc[2]))
  if (x1 > 0 && x2 > 0) {
    lr <- log(p1 / p2)
    se <- sqrt(1 / x1 - 1 / n1 + 1 / x2 - 1 / n2)
    zc <- zlevel(level)
    cat(sprintf("  lift=%.17g katz=[%.17g, %.17g]\n", p1 / p2 - 1, exp(lr - zc * se) - 1, exp(lr + zc * se) - 1))
  }
  pp <- (x1 + x2) / (n1 + n2)
  z <- d / sqrt(pp * (1 - pp) * (1 / n1 + 1 / n2))
  pv <- switch(alternative,
    two.sided = 2 * pnorm(-abs(z)),
    greater = pnorm(z, lower.tail = FALSE),
    less = pnorm(z))
  crit <- if (alternative == "two.sided") qnorm(1 - alpha / 2) else qnorm(1 - alpha)
  cat(sprintf("  z=%.17g crit=%.17g p=%.17g\n", z, crit, pv))
  f <- fisher.test(matrix(c(x1, n1 - x1, x2, n2 - x2), 2), alternative = alternative)
  cat(sprintf("  fisher p=%.17g\n", f$p.value))
  invisible(c(z = pv, fisher = f$p.value))
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

# Adjusted p-values of a family, in the order given.
adjust <- function(name, p, method) {
  cat(sprintf("adj %s (%s, m=%d): %s\n", name, method, length(p),
    paste(sprintf("%.17g", p.adjust(p, method)), collapse = ", ")))
}

# The Bonferroni simultaneous interval of p1 - p2 for a family of m
# two-sided comparisons: Newcombe at level 1 - alpha / m.
simultaneous <- function(name, x1, n1, x2, n2, m) {
  nc <- newcombe(x1, n1, x2, n2, 1 - alpha / m)
  cat(sprintf("sim %s: level=%.17g newcombe=[%.17g, %.17g]\n", name, 1 - alpha / m, nc[1], nc[2]))
}

# Restricted maximum likelihood estimates of (p1, p2) under
# H0: p1 - p2 = delta, closed form of Farrington and Manning (1990), and
# the standard error of p1 - p2 at them.
fm_se <- function(x1, n1, x2, n2, delta) {
  p1 <- x1 / n1; p2 <- x2 / n2; theta <- n2 / n1
  a <- 1 + theta
  b <- -(1 + theta + p1 + theta * p2 + delta * (theta + 2))
  c <- delta^2 + delta * (2 * p1 + theta + 1) + p1 + theta * p2
  d <- -p1 * delta * (1 + delta)
  v <- b^3 / (27 * a^3) - b * c / (6 * a^2) + d / (2 * a)
  u <- sign(v) * sqrt(b^2 / (9 * a^2) - c / (3 * a))
  w <- (pi + acos(v / u^3)) / 3
  r1 <- 2 * u * cos(w) - b / (3 * a)
  r2 <- r1 - delta
  sqrt(r1 * (1 - r1) / n1 + r2 * (1 - r2) / n2)
}

# Non-inferiority of treatment arm 1 against control arm 2 with the
# Farrington-Manning score z test. Higher is better:
#   H1: p1 - p2 > -margin, z = (d + margin) / se, p = Q(z);
# lower is better:
#   H1: p1 - p2 < margin,  z = (d - margin) / se, p = P(z).
# A relative margin is a share of the control's observed rate. The interval
# is Newcombe's at 1 - 2 alpha, whose bound on the harmful side is compared
# with the margin.
noninf <- function(name, x1, n1, x2, n2, margin, relative = FALSE, lower_is_better = FALSE) {
  m <- if (relative) margin * x2 / n2 else margin
  d <- x1 / n1 - x2 / n2
  if (lower_is_better) {
    z <- (d - m) / fm_se(x1, n1, x2, n2, m)
    p <- pnorm(z)
  } else {
    z <- (d + m) / fm_se(x1, n1, x2, n2, -m)
    p <- pnorm(z, lower.tail = FALSE)
  }
  nc <- newcombe(x1, n1, x2, n2, 1 - 2 * alpha)
  cat(sprintf("ni %s: absolute margin=%.17g z=%.17g crit=%.17g p=%.17g newcombe(%.2g)=[%.17g, %.17g]\n",
    name, m, z, qnorm(1 - alpha), p, 1 - 2 * alpha, nc[1], nc[2]))
}

cat("== two_arm: checkout-button-color\n")
srm("checkout", c(10112, 9988), c(0.5, 0.5))
arm("control purchase", 1089, 9900)
arm("green purchase", 1196, 9800)
p_purchase <- compare("purchase", 1196, 9800, 1089, 9900)
arm("control signup", 2031, 10112)
arm("green signup", 2050, 9988)
p_signup <- compare("signup", 2050, 9988, 2031, 10112)
adjust("checkout: purchase, signup", c(p_purchase["z"], p_signup["z"]), "holm")

cat("== three_arm: onboarding-tour\n")
srm("onboarding", c(1050, 1020, 890), c(1, 1, 1) / 3)
arm("control activated", 315, 1050)
arm("short activated", 357, 1020)
arm("long activated", 298, 890)
p_short_act <- compare("short activated", 357, 1020, 315, 1050)
p_long_act <- compare("long activated", 298, 890, 315, 1050)
target("control activated", 315, 1050, 0.3)
target("short activated", 357, 1020, 0.3)
target("long activated", 298, 890, 0.3)
arm("control upgrade", 0, 1050)
arm("short upgrade", 6, 1020)
arm("long upgrade", 4, 890)
p_short_up <- compare("short upgrade", 6, 1020, 0, 1050)
p_long_up <- compare("long upgrade", 4, 890, 0, 1050)
target("control upgrade", 0, 1050, 0.002)
target("short upgrade", 6, 1020, 0.002)
target("long upgrade", 4, 890, 0.002)
# The upgrade comparisons are decided by Fisher's exact test (too few
# conversions for the normal approximation), so its p-values enter the family.
adjust("onboarding: short activated, long activated, short upgrade, long upgrade",
  c(p_short_act["z"], p_long_act["z"], p_short_up["fisher"], p_long_up["fisher"]), "holm")

cat("== guardrails: reorder-reminder\n")
srm("reorder", c(24010, 23870, 24120), c(1, 1, 1) / 3)
arm("control reorder", 2281, 24010)
arm("email reorder", 2530, 23870)
arm("push reorder", 2430, 24120)
p_email_re <- compare("email reorder", 2530, 23870, 2281, 24010)
p_push_re <- compare("push reorder", 2430, 24120, 2281, 24010)
adjust("reorder: email reorder, push reorder", c(p_email_re["z"], p_push_re["z"]), "bonferroni")
simultaneous("email reorder", 2530, 23870, 2281, 24010, 2)
simultaneous("push reorder", 2430, 24120, 2281, 24010, 2)
arm("control repeat_visit", 9604, 24010)
arm("email repeat_visit", 9500, 23870)
arm("push repeat_visit", 9700, 24120)
compare("email repeat_visit", 9500, 23870, 9604, 24010)
compare("push repeat_visit", 9700, 24120, 9604, 24010)
noninf("email repeat_visit", 9500, 23870, 9604, 24010, 0.03, relative = TRUE)
noninf("push repeat_visit", 9700, 24120, 9604, 24010, 0.03, relative = TRUE)
arm("control unsubscribe", 480, 24010)
arm("email unsubscribe", 650, 23870)
arm("push unsubscribe", 500, 24120)
compare("email unsubscribe", 650, 23870, 480, 24010)
compare("push unsubscribe", 500, 24120, 480, 24010)
noninf("email unsubscribe", 650, 23870, 480, 24010, 0.005, lower_is_better = TRUE)
noninf("push unsubscribe", 500, 24120, 480, 24010, 0.005, lower_is_better = TRUE)

cat("== one_sided: free-shipping-banner (alternative greater, intervals at 1 - 2 alpha)\n")
srm("banner", c(8020, 7980), c(0.5, 0.5))
arm("control purchase", 642, 8020, level = 0.9)
arm("banner purchase", 720, 7980, level = 0.9)
p_banner_purchase <- compare("banner purchase", 720, 7980, 642, 8020, alternative = "greater", level = 0.9)
arm("control signup", 240, 8020, level = 0.9)
arm("banner signup", 262, 7980, level = 0.9)
p_banner_signup <- compare("banner signup", 262, 7980, 240, 8020, alternative = "greater", level = 0.9)
adjust("banner: purchase, signup", c(p_banner_purchase["z"], p_banner_signup["z"]), "BH")

cat("== two_arm segments: device (control desktop, mobile, tablet, null; green-button has no tablet units)\n")
arm("control purchase desktop", 618, 5590)
arm("green purchase desktop", 700, 5500)
compare("purchase desktop", 700, 5500, 618, 5590)
arm("control purchase mobile", 466, 4288)
arm("green purchase mobile", 494, 4292)
compare("purchase mobile", 494, 4292, 466, 4288)
arm("control purchase tablet", 2, 10)
arm("control purchase null", 3, 12)
arm("green purchase null", 2, 8)
compare("purchase null", 2, 8, 3, 12)
arm("control signup desktop", 1148, 5710)
arm("green signup desktop", 1160, 5600)
compare("signup desktop", 1160, 5600, 1148, 5710)
arm("control signup mobile", 876, 4380)
arm("green signup mobile", 886, 4380)
compare("signup mobile", 886, 4380, 876, 4380)
arm("control signup tablet", 2, 10)
arm("control signup null", 5, 12)
arm("green signup null", 4, 8)
compare("signup null", 4, 8, 5, 12)
