#!/usr/bin/env Rscript
# Reference values for rbfield's GCV-chosen thin-plate smoothing spline, from mgcv.
#
# Run from the repository root:   Rscript test/reference/mgcv_tp.R
# Writes test/reference/fixtures/mgcv-<dataset>.json.
#
# The data are made here, in R (set.seed + runif/rnorm), from Franke's (1982) test function with
# Gaussian noise -- never by rbfield. For each data set mgcv fits
#   gam(z ~ s(x, y, bs = "tp", k = N), method = "GCV.Cp")
# With k = N (the number of distinct locations) and N below max.knots (2000) mgcv's thin plate
# regression spline is not truncated: its basis is the full thin plate spline (Wood 2003;
# ?tprs, ?smooth.construct.tp.smooth.spec), i.e. the exact TPS with the linear polynomial null space
# (m = 2 for d = 2), and the penalty is the usual TPS energy. That is the same family of smoothers
# as rbfield's thin-plate kernel with linear trend (only the scale of lambda differs: mgcv's kernel
# is r^2 log r / (8 pi)), so the GCV criterion n * RSS / (n - edf)^2 has the same minimiser.
suppressPackageStartupMessages(library(mgcv))

franke <- function(x, y) {
  # R. Franke (1982), Math. Comp. 38(157), 181-200.
  0.75 * exp(-((9 * x - 2)^2 + (9 * y - 2)^2) / 4) +
    0.75 * exp(-((9 * x + 1)^2) / 49 - (9 * y + 1) / 10) +
    0.5 * exp(-((9 * x - 7)^2 + (9 * y - 3)^2) / 4) -
    0.2 * exp(-(9 * x - 4)^2 - (9 * y - 7)^2)
}

num <- function(v) paste0("[", paste(sprintf("%.17g", v), collapse = ", "), "]")
conv_text <- function(m) {
  cv <- m$mgcv.conv
  if (is.null(cv)) return(paste("optimizer", paste(m$optimizer, collapse = "/")))
  paste0("magic: iter=", cv$iter, " fully.converged=", cv$fully.converged, " rank=", cv$rank)
}
str1 <- function(s) paste0("\"", gsub("\"", "\\\\\"", s), "\"")

args <- commandArgs(trailingOnly = FALSE)
script <- sub("^--file=", "", args[grep("^--file=", args)])
here <- if (length(script)) dirname(normalizePath(script)) else "test/reference"
out_dir <- file.path(here, "fixtures")
dir.create(out_dir, showWarnings = FALSE, recursive = TRUE)

run <- function(name, seed, n, x0, y0, size, zbase, zscale, sigma, digits_xy, digits_z) {
  set.seed(seed, kind = "Mersenne-Twister", normal.kind = "Inversion")
  u <- runif(n)
  v <- runif(n)
  z <- zbase + zscale * franke(u, v) + rnorm(n, 0, sigma)
  x <- x0 + size * u
  y <- y0 + size * v
  if (!is.na(digits_xy)) { x <- round(x, digits_xy); y <- round(y, digits_xy) }
  if (!is.na(digits_z)) z <- round(z, digits_z)
  d <- data.frame(x = x, y = y, z = z)
  k <- nrow(unique(d[, c("x", "y")]))
  m <- gam(z ~ s(x, y, bs = "tp", k = k), data = d, method = "GCV.Cp")
  edf <- sum(m$edf)
  fitted_values <- as.numeric(fitted(m))
  rss <- sum((z - fitted_values)^2)
  gcv_check <- n * rss / (n - edf)^2
  cat(sprintf("%12s n=%d k=%d edf=%.6f gcv=%.8g (n*rss/(n-edf)^2 = %.8g) sp=%.6g %s\n",
              name, n, k, edf, m$gcv.ubre, gcv_check, m$sp, conv_text(m)))
  recipe <- sprintf(paste0("R set.seed(%d) (Mersenne-Twister, Inversion); u, v <- runif(%d); ",
                           "z <- %g + %g*franke(u, v) + rnorm(%d, 0, %g); x <- %.17g + %g*u; y <- %.17g + %g*v%s"),
                    seed, n, zbase, zscale, n, sigma, x0, size, y0, size,
                    if (is.na(digits_xy)) "" else sprintf("; x, y rounded to %d decimals, z to %d", digits_xy, digits_z))
  json <- paste0(
    "{\n",
    " \"source\": ", str1(sprintf("R mgcv %s, gam(z ~ s(x, y, bs = \"tp\", k = %d), method = \"GCV.Cp\") (%s)",
                                  as.character(packageVersion("mgcv")), k, R.version.string)), ",\n",
    " \"mgcvVersion\": ", str1(as.character(packageVersion("mgcv"))), ",\n",
    " \"rVersion\": ", str1(R.version.string), ",\n",
    " \"generator\": \"test/reference/mgcv_tp.R\",\n",
    " \"dataset\": ", str1(name), ",\n",
    " \"recipe\": ", str1(recipe), ",\n",
    " \"k\": ", k, ",\n",
    " \"points\": {\"x\": ", num(x), ",\n  \"y\": ", num(y), ",\n  \"z\": ", num(z), "},\n",
    " \"edf\": ", sprintf("%.17g", edf), ",\n",
    " \"gcv\": ", sprintf("%.17g", m$gcv.ubre), ",\n",
    " \"rss\": ", sprintf("%.17g", rss), ",\n",
    " \"sp\": ", sprintf("%.17g", m$sp), ",\n",
    " \"fitted\": ", num(fitted_values), "\n",
    "}\n")
  path <- file.path(out_dir, sprintf("mgcv-%s.json", name))
  writeLines(json, path, sep = "")
  cat(sprintf("wrote %s (%d bytes)\n", path, file.size(path)))
}

run("unit-square", 1982, 100, 0, 0, 1, 0, 1, 0.1, NA, NA)
run("site", 28355, 150, 500000, 6000000, 2000, 100, 50, 3, 2, 3)
