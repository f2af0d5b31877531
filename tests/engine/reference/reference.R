# Reference values for the Lotproof engine tests, computed at test time with base R
# (Debian r-base-core: stats::t.test, shapiro.test, wilcox.test, qt, pt).
#
# Usage: Rscript reference.R <input> <output>
# Input: one task per line, fields separated by single spaces; numbers are C99 hex floats
# ("0x1.f4p+8"), so the data reach R bit for bit.
#   T <id> <alternative> <mu> <conf.level> <x1> <x2> ...   one-sample t.test
#   S <id> <x1> ...                                        shapiro.test
#   W <id> <alternative> <mu> <exact: TRUE|FALSE|NULL> <x1> ...   wilcox.test (correct = TRUE)
#   Q <id> <p> <df>                                        qt(p, df)
#   P <id> <t> <df>                                        pt(t, df) and pt(t, df, lower.tail = FALSE)
#   M <id> <x1> ...                                        mean(x) and sd(x)
#   B <id> <reps> <x1> ...                                 time `reps` calls of t.test(x, mu = mean(x) - 1, alternative = "less")
# Output: "<id> v1 v2 ..." per task, each value printed with sprintf('%.17g') (NA for a missing value).
args <- commandArgs(trailingOnly = TRUE)
lines <- readLines(args[1])
out <- character(length(lines))
fmt <- function(v) ifelse(is.na(v), "NA", sprintf("%.17g", v))
num <- function(s) as.numeric(s)
for (k in seq_along(lines)) {
  f <- strsplit(lines[k], " ", fixed = TRUE)[[1]]
  kind <- f[1]
  id <- f[2]
  vals <- switch(kind,
    T = {
      x <- num(f[-(1:5)])
      r <- t.test(x, mu = num(f[4]), alternative = f[3], conf.level = num(f[5]))
      c(r$statistic, r$parameter, r$p.value, r$conf.int[1], r$conf.int[2])
    },
    S = {
      r <- shapiro.test(num(f[-(1:2)]))
      c(r$statistic, r$p.value)
    },
    W = {
      ex <- switch(f[5], "TRUE" = TRUE, "FALSE" = FALSE, NULL)
      r <- suppressWarnings(wilcox.test(num(f[-(1:5)]), mu = num(f[4]), alternative = f[3], exact = ex, correct = TRUE))
      c(r$statistic, r$p.value, as.numeric(grepl("exact", r$method, fixed = TRUE)))
    },
    M = {
      x <- num(f[-(1:2)])
      c(mean(x), sd(x))
    },
    Q = c(qt(num(f[3]), num(f[4]))),
    P = c(pt(num(f[3]), num(f[4])), pt(num(f[3]), num(f[4]), lower.tail = FALSE)),
    B = {
      reps <- as.integer(f[3])
      x <- num(f[-(1:3)])
      mu <- mean(x) - 1
      times <- numeric(5)
      for (j in 1:5) {
        t0 <- proc.time()[["elapsed"]]
        for (i in seq_len(reps)) t.test(x, mu = mu, alternative = "less")
        times[j] <- (proc.time()[["elapsed"]] - t0) / reps
      }
      c(median(times) * 1000)
    },
    stop(paste("unknown task", kind)))
  out[k] <- paste(id, paste(fmt(vals), collapse = " "))
}
writeLines(out, args[2])
