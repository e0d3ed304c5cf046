# Reference values for the experiment statistics (tests/core/test_stats_reference.cpp), from R's
# stats package as shipped in Debian's r-base-core. Each row keeps the exact R call that produced
# it (the call text is what is evaluated), and each file starts with the R version used.
#
# Run from the repository root:   Rscript tests/data/make_stats_reference.R
# Writes tests/data/stats_r_*.csv. Numbers are written with 17 significant digits.

out_dir <- "tests/data"
version_line <- paste0("# produced by tests/data/make_stats_reference.R with ", R.version.string,
                       ", stats ", as.character(packageVersion("stats")))

num <- function(x) ifelse(is.infinite(x), ifelse(x > 0, "inf", "-inf"), sprintf("%.17g", x))
quote_text <- function(s) paste0('"', gsub('"', '""', s), '"')
r_alt <- c("two-sided" = "two.sided", "greater" = "greater", "less" = "less")

write_rows <- function(file, what, header, rows) {
  path <- file.path(out_dir, file)
  con <- file(path, "w")
  writeLines(version_line, con)
  writeLines(paste0("# ", what), con)
  writeLines(paste(header, collapse = ","), con)
  for (r in rows) writeLines(paste(r, collapse = ","), con)
  close(con)
  cat("wrote", path, "\n")
}

# ---- two proportions: prop.test(correct = FALSE); treatment first so DELTA = treatment - control
prop_cases <- list(
  c(1000, 100, 1000, 130), c(5000, 250, 4800, 290), c(200, 37, 180, 21), c(50, 3, 60, 9),
  c(12, 5, 10, 0), c(1000000, 20000, 1000000, 20300), c(30, 29, 30, 30), c(2, 1, 3, 2),
  c(2500000, 250000, 2500000, 275500)  # |z| about 37: p-value below 1e-300
)
rows <- list()
for (k in seq_along(prop_cases)) {
  cc <- prop_cases[[k]]
  for (alt in names(r_alt)) for (conf in c(0.95, 0.9)) {
    call <- sprintf("prop.test(x = c(%d, %d), n = c(%d, %d), correct = FALSE, alternative = '%s', conf.level = %s)",
                    cc[4], cc[2], cc[3], cc[1], r_alt[[alt]], format(conf))
    r <- suppressWarnings(eval(parse(text = call)))
    rows[[length(rows) + 1]] <- c(k, sprintf("%d", cc), alt, format(conf), num(unname(r$statistic)), num(r$p.value),
                                  num(unname(r$estimate[1] - r$estimate[2])), num(r$conf.int[1]), num(r$conf.int[2]),
                                  quote_text(call))
  }
}
write_rows("stats_r_prop_test.csv", "two proportions: R prop.test(correct = FALSE), x_squared = pooled z^2",
           c("case", "control_n", "control_x", "treatment_n", "treatment_x", "alternative", "confidence",
             "x_squared", "p_value", "estimate", "ci_low", "ci_high", "call"), rows)

# ---- Fisher's exact test: rows (treatment, control), columns (converted, not converted)
fisher_cases <- list(
  c(12, 5, 10, 0), c(20, 9, 20, 3), c(60, 9, 50, 3), c(1000, 130, 1000, 100), c(10, 0, 10, 0), c(10, 10, 10, 10),
  c(5, 0, 5, 5), c(3000, 60, 3000, 10), c(200000, 2100, 200000, 2000), c(7, 3, 9, 3), c(800, 400, 800, 5),
  c(2000, 3, 2000, 860),  # p-value below 1e-300
  c(10, 3, 10, 7), c(20, 15, 20, 5), c(31, 9, 31, 22)  # symmetric laws: tied tables on both sides
)
rows <- list()
for (k in seq_along(fisher_cases)) {
  cc <- fisher_cases[[k]]  # control n, x, treatment n, x
  for (alt in names(r_alt)) {
    call <- sprintf("fisher.test(matrix(c(%d, %d, %d, %d), nrow = 2, byrow = TRUE), alternative = '%s')",
                    cc[4], cc[3] - cc[4], cc[2], cc[1] - cc[2], r_alt[[alt]])
    r <- eval(parse(text = call))
    rows[[length(rows) + 1]] <- c(k, sprintf("%d", cc), alt, num(r$p.value), quote_text(call))
  }
}
write_rows("stats_r_fisher.csv", "Fisher's exact test: R fisher.test on the 2x2 table (treatment, control) x (converted, not)",
           c("case", "control_n", "control_x", "treatment_n", "treatment_x", "alternative", "p_value", "call"), rows)

# ---- Wilson score intervals: one-sample prop.test(correct = FALSE) (parts of Newcombe's interval)
rows <- list()
for (cc in list(c(10, 0), c(10, 3), c(70, 56), c(80, 48), c(10, 10), c(29, 0), c(56, 5), c(2, 1))) {
  for (alt in names(r_alt)) for (conf in c(0.95, 0.8)) {
    call <- sprintf("prop.test(x = %d, n = %d, correct = FALSE, alternative = '%s', conf.level = %s)",
                    cc[2], cc[1], r_alt[[alt]], format(conf))
    r <- suppressWarnings(eval(parse(text = call)))
    rows[[length(rows) + 1]] <- c(sprintf("%d", cc), alt, format(conf), num(r$conf.int[1]), num(r$conf.int[2]), quote_text(call))
  }
}
write_rows("stats_r_wilson.csv", "Wilson score interval: R one-sample prop.test(correct = FALSE)$conf.int",
           c("n", "x", "alternative", "confidence", "ci_low", "ci_high", "call"), rows)

# ---- two means: t.test on generated data; the summaries (n, mean, sd) are written with the results
t_cases <- list(  # seed, control n, mean, sd, treatment n, mean, sd
  c(11, 10, 5, 2, 12, 6, 3), c(12, 30, 100, 15, 25, 92, 10), c(13, 2, 0, 1, 3, 1, 1), c(14, 200, 3.2, 0.8, 180, 3.3, 0.9),
  c(15, 5, -4, 1, 40, -3, 6), c(16, 1000, 20, 40, 1000, 23, 45),
  c(17, 200, 0, 1, 200, 11.8, 1)  # t about 115 on about 398 df: p-value below 1e-300
)
rows <- list()
for (k in seq_along(t_cases)) {
  cc <- t_cases[[k]]
  gen <- sprintf("set.seed(%d); ctl <- rnorm(%d, %s, %s); trt <- rnorm(%d, %s, %s)",
                 cc[1], cc[2], format(cc[3]), format(cc[4]), cc[5], format(cc[6]), format(cc[7]))
  eval(parse(text = gen))
  for (var_equal in c(FALSE, TRUE)) for (alt in names(r_alt)) for (conf in c(0.95, 0.99)) {
    call <- sprintf("%s; t.test(trt, ctl, var.equal = %s, alternative = '%s', conf.level = %s)",
                    gen, var_equal, r_alt[[alt]], format(conf))
    r <- eval(parse(text = call))
    rows[[length(rows) + 1]] <- c(k, length(ctl), num(mean(ctl)), num(sd(ctl)), length(trt), num(mean(trt)), num(sd(trt)),
                                  as.integer(var_equal), alt, format(conf), num(unname(r$statistic)),
                                  num(unname(r$parameter)), num(r$p.value),
                                  num(unname(r$estimate[1] - r$estimate[2])), num(r$conf.int[1]), num(r$conf.int[2]),
                                  quote_text(call))
  }
}
write_rows("stats_r_t_test.csv", "two means: R t.test(var.equal = FALSE (Welch) / TRUE (pooled)) on the data of the call",
           c("case", "control_n", "control_mean", "control_sd", "treatment_n", "treatment_mean", "treatment_sd",
             "var_equal", "alternative", "confidence", "statistic", "df", "p_value", "estimate", "ci_low", "ci_high",
             "call"), rows)

# ---- planning: power.prop.test and power.t.test, solved to tol = 1e-12 (R's default is eps^0.25)
rows <- list()
add_plan <- function(design, solve_for, p1, p2, delta, sd, n, sig, power, alt, call, field) {
  r <- eval(parse(text = call))
  rows[[length(rows) + 1]] <<- c(design, solve_for, p1, p2, delta, sd, n, sig, power, alt, num(r[[field]]), quote_text(call))
}
prop_plan <- list(  # p1 (baseline), p2, power, sig.level, alternative
  list(0.1, 0.11, 0.8, 0.05, "two-sided"), list(0.5, 0.75, 0.9, 0.05, "two-sided"), list(0.02, 0.025, 0.8, 0.001, "two-sided"),
  list(0.3, 0.25, 0.8, 0.01, "less"), list(0.05, 0.06, 0.9, 1e-5, "greater"), list(0.9, 0.95, 0.9, 0.005, "two-sided"),
  list(0.4, 0.2, 0.95, 0.0002, "two-sided")
)
for (c in prop_plan) {
  ra <- if (c[[5]] == "two-sided") "two.sided" else "one.sided"
  call <- sprintf("power.prop.test(p1 = %s, p2 = %s, power = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                  format(c[[1]]), format(c[[2]]), format(c[[3]]), format(c[[4]]), ra)
  add_plan("proportions", "n", format(c[[1]]), format(c[[2]]), "", "", "", format(c[[4]]), format(c[[3]]), c[[5]], call, "n")
  n <- 1000
  call <- sprintf("power.prop.test(n = %d, p1 = %s, p2 = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                  n, format(c[[1]]), format(c[[2]]), format(c[[4]]), ra)
  add_plan("proportions", "power", format(c[[1]]), format(c[[2]]), "", "", n, format(c[[4]]), "", c[[5]], call, "power")
  if (c[[2]] > c[[1]]) {  # R solves p2 above p1: the smallest detectable increase
    call <- sprintf("power.prop.test(n = %d, p1 = %s, power = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                    n, format(c[[1]]), format(c[[3]]), format(c[[4]]), ra)
    add_plan("proportions", "p2", format(c[[1]]), "", "", "", n, format(c[[4]]), format(c[[3]]), c[[5]], call, "p2")
  }
}
t_plan <- list(  # delta, sd, power, sig.level, alternative
  list(1, 1, 0.9, 0.05, "two-sided"), list(0.2, 1, 0.8, 0.05, "two-sided"), list(0.5, 2, 0.8, 1e-4, "greater"),
  list(3, 10, 0.95, 0.001, "two-sided"), list(0.05, 1, 0.8, 0.05, "two-sided"), list(-2, 3, 0.85, 0.01, "less"),
  list(4, 1, 0.8, 0.05, "two-sided")
)
for (c in t_plan) {
  ra <- if (c[[5]] == "two-sided") "two.sided" else "one.sided"
  call <- sprintf("power.t.test(delta = %s, sd = %s, power = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                  format(abs(c[[1]])), format(c[[2]]), format(c[[3]]), format(c[[4]]), ra)
  add_plan("means", "n", "", "", format(c[[1]]), format(c[[2]]), "", format(c[[4]]), format(c[[3]]), c[[5]], call, "n")
  for (n in c(10, 57)) {
    call <- sprintf("power.t.test(n = %d, delta = %s, sd = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                    n, format(abs(c[[1]])), format(c[[2]]), format(c[[4]]), ra)
    add_plan("means", "power", "", "", format(c[[1]]), format(c[[2]]), n, format(c[[4]]), "", c[[5]], call, "power")
  }
  call <- sprintf("power.t.test(n = 57, sd = %s, power = %s, sig.level = %s, alternative = '%s', tol = 1e-12)",
                  format(c[[2]]), format(c[[3]]), format(c[[4]]), ra)
  add_plan("means", "delta", "", "", "", format(c[[2]]), 57, format(c[[4]]), format(c[[3]]), c[[5]], call, "delta")
}
write_rows("stats_r_power.csv", "planning: R power.prop.test / power.t.test (strict = FALSE); result is the solved field",
           c("design", "solve_for", "p1", "p2", "delta", "sd", "n", "sig_level", "power", "alternative", "result", "call"), rows)

# ---- standard normal quantiles
rows <- list()
for (p in c(0.5, 0.8, 0.9, 0.95, 0.975, 0.99, 0.995, 0.999, 0.9995, 0.025, 1e-10, 1e-300)) {
  call <- sprintf("qnorm(%s)", format(p, digits = 17))
  rows[[length(rows) + 1]] <- c(format(p, digits = 17), num(eval(parse(text = call))), quote_text(call))
}
write_rows("stats_r_qnorm.csv", "standard normal quantiles: R qnorm", c("p", "quantile", "call"), rows)
