# gen_cases.R writes r_cases.csv, extra check values for package stats,
# computed with base R (stats package) only. Run from this directory:
#
#   Rscript gen_cases.R > r_cases.csv
#
# Columns: case id, method, x1, n1, x2, n2, param (p0 or confidence level),
# alternative, quantity, value (%.17g). One-sample methods leave x2, n2 at 0.
set.seed(20260415)
alts <- c("two.sided", "greater", "less")
rows <- list()
id <- 0
emit <- function(method, x1, n1, x2, n2, param, alt, quantity, value) {
  rows[[length(rows) + 1]] <<- sprintf("R-%03d,%s,%.0f,%.0f,%.0f,%.0f,%.17g,%s,%s,%.17g",
    id, method, x1, n1, x2, n2, param, alt, quantity, value)
}

# Two-arm tables: small, medium, large and a few extreme ones.
two <- rbind(
  c(0, 5, 3, 5), c(5, 5, 0, 5), c(1, 1, 0, 1), c(2, 3, 1, 4), c(12, 40, 4, 38),
  c(30, 1000, 45, 1000), c(230, 1000000, 180, 1000000),
  c(500400, 1000000, 499000, 1000000), c(15000, 250000, 14700, 250000),
  c(3, 200000, 17, 200000), c(0, 100000, 9, 100000), c(999990, 1000000, 999950, 1000000)
)
for (i in 1:20) {
  n1 <- sample(c(5:60, 100, 500, 2000, 30000), 1); n2 <- sample(c(5:60, 100, 500, 2000, 30000), 1)
  p <- runif(1, 0.01, 0.6)
  two <- rbind(two, c(rbinom(1, n1, p), n1, rbinom(1, n2, p * runif(1, 0.7, 1.4)), n2))
}
for (r in seq_len(nrow(two))) {
  x1 <- two[r, 1]; n1 <- two[r, 2]; x2 <- two[r, 3]; n2 <- two[r, 4]
  tab <- matrix(c(x1, x2, n1 - x1, n2 - x2), 2)
  for (a in alts) {
    id <- id + 1
    emit("fisher", x1, n1, x2, n2, 0, a, "p", fisher.test(tab, alternative = a)$p.value)
    pbar <- (x1 + x2) / (n1 + n2)
    if (pbar > 0 && pbar < 1) {
      id <- id + 1
      pt <- suppressWarnings(prop.test(c(x1, x2), c(n1, n2), correct = FALSE, alternative = a))
      emit("prop2", x1, n1, x2, n2, 0, a, "z", sign(x1 / n1 - x2 / n2) * sqrt(unname(pt$statistic)))
      emit("prop2", x1, n1, x2, n2, 0, a, "p", pt$p.value)
    }
  }
}

# One-sample cases against a target rate p0.
one <- rbind(
  c(0, 1, 0.5), c(1, 1, 0.3), c(0, 30, 0.1), c(30, 30, 0.9), c(3, 6, 0.5), c(4, 12, 1/3),
  c(17, 1000, 0.01), c(9800, 1000000, 0.01), c(10200, 1000000, 0.01), c(2, 2000000, 1e-5),
  c(499500, 1000000, 0.5)
)
for (i in 1:20) {
  n <- sample(c(1:40, 100, 1000, 50000), 1); p0 <- round(runif(1, 0.01, 0.95), 3)
  one <- rbind(one, c(rbinom(1, n, min(0.99, p0 * runif(1, 0.6, 1.5))), n, p0))
}
for (r in seq_len(nrow(one))) {
  x <- one[r, 1]; n <- one[r, 2]; p0 <- one[r, 3]
  if (x > n) x <- n
  for (a in alts) {
    id <- id + 1
    emit("binom", x, n, 0, 0, p0, a, "p", binom.test(x, n, p0, alternative = a)$p.value)
    id <- id + 1
    pt <- suppressWarnings(prop.test(x, n, p0, correct = FALSE, alternative = a))
    emit("prop1", x, n, 0, 0, p0, a, "p", pt$p.value)
  }
}

# Intervals for one proportion at several levels.
for (r in seq_len(nrow(one))) {
  x <- min(one[r, 1], one[r, 2]); n <- one[r, 2]
  for (lv in c(0.8, 0.95, 0.999)) {
    id <- id + 1
    w <- suppressWarnings(prop.test(x, n, correct = FALSE, conf.level = lv))$conf.int
    emit("wilson", x, n, 0, 0, lv, "two.sided", "lower", w[1])
    emit("wilson", x, n, 0, 0, lv, "two.sided", "upper", w[2])
    id <- id + 1
    cp <- binom.test(x, n, conf.level = lv)$conf.int
    emit("clopper", x, n, 0, 0, lv, "two.sided", "lower", cp[1])
    emit("clopper", x, n, 0, 0, lv, "two.sided", "upper", cp[2])
  }
}

# Normal upper tails and quantiles. The tails stop at 37.5: R's
# pnorm(38, lower.tail = FALSE) returns 0, though the true value 2.9e-316 is
# a (subnormal) double.
for (z in c(-3, -0.5, 0, 0.3, 1.5, 3.7, 6.2, 12.5, 25, 33, 37.5)) {
  id <- id + 1
  emit("uppertail", 0, 0, 0, 0, z, "greater", "p", pnorm(z, lower.tail = FALSE))
}
for (p in c(1e-300, 1e-50, 1e-15, 0.001, 0.2, 0.5, 0.7, 0.999, 1 - 1e-12)) {
  id <- id + 1
  emit("quantile", 0, 0, 0, 0, p, "two.sided", "z", qnorm(p))
}

cat("case,method,x1,n1,x2,n2,param,alternative,quantity,value\n")
cat(paste0(unlist(rows), "\n"), sep = "")
cat(sprintf("# %s\n", R.version.string))
