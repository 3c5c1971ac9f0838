#!/usr/bin/env Rscript
# mgcv reference predictions for many cases in one R session (base R + mgcv only).
#
# Usage:  Rscript bench/sweep/mgcv_sweep.R DIR
# DIR/cases.csv   id,log,k          (log TRUE/FALSE; k the basis dimension, NA for mgcv's default)
# DIR/points.csv  id,set,x,y,z      (set "train" or "test"; z NA for test rows)
# Writes DIR/mgcv.csv        id,i,est,lo,hi,se   (i: 0-based test point; NA when the fit failed)
#        DIR/mgcv-cases.csv  id,status,k,edf,sig2,message
#
# Per case: gam(z ~ s(x, y, bs = "tp", k = k), method = "GCV.Cp") on coordinates centred on the
# training mean (the thin-plate spline is translation invariant; centring avoids losing digits at
# y ~ 6e6), then predict(m, newdata, se.fit = TRUE).
#   log = FALSE: est = fit, lo/hi = fit -/+ 1.96 se.
#   log = TRUE:  fitted to ln z; est = exp(fit + sig2/2) (lognormal mean, sig2 = m$sig2),
#                lo/hi = exp(fit -/+ 1.96 se + sig2/2); se is on the log scale.
# A case mgcv cannot fit (an error from gam or predict) gets status "error" and NA predictions.
suppressPackageStartupMessages(library(mgcv))

dir <- commandArgs(trailingOnly = TRUE)[1]
cases <- read.csv(file.path(dir, "cases.csv"), colClasses = c("character", "logical", "integer"))
pts <- read.csv(file.path(dir, "points.csv"), colClasses = c("character", "character", "numeric", "numeric", "numeric"))
by_id <- split(pts, factor(pts$id, levels = cases$id))
g <- function(v) ifelse(is.na(v), "NA", sprintf("%.17g", v))
pred_lines <- character(0)
case_lines <- character(nrow(cases))

for (j in seq_len(nrow(cases))) {
  id <- cases$id[j]
  is_log <- cases$log[j]
  p <- by_id[[id]]
  tr <- p[p$set == "train", ]
  te <- p[p$set == "test", ]
  mx <- mean(tr$x)
  my <- mean(tr$y)
  d <- data.frame(x = tr$x - mx, y = tr$y - my, z = if (is_log) log(tr$z) else tr$z)
  nd <- data.frame(x = te$x - mx, y = te$y - my)
  k <- if (is.na(cases$k[j])) -1L else cases$k[j] # -1: mgcv's default basis dimension
  out <- tryCatch({
    m <- gam(z ~ s(x, y, bs = "tp", k = k), data = d, method = "GCV.Cp")
    pr <- predict(m, nd, se.fit = TRUE)
    f <- as.numeric(pr$fit)
    se <- as.numeric(pr$se.fit)
    s2 <- if (is_log) m$sig2 / 2 else 0
    tf <- if (is_log) exp else identity
    list(status = "ok", k = m$smooth[[1]]$bs.dim, edf = sum(m$edf), sig2 = m$sig2,
         est = tf(f + s2), lo = tf(f - 1.96 * se + s2), hi = tf(f + 1.96 * se + s2), se = se, message = "")
  }, error = function(e) {
    na <- rep(NA_real_, nrow(te))
    list(status = "error", k = k, edf = NA, sig2 = NA, est = na, lo = na, hi = na, se = na,
         message = gsub("[\",\r\n]", " ", conditionMessage(e)))
  })
  pred_lines <- c(pred_lines, paste(id, seq_len(nrow(te)) - 1L, g(out$est), g(out$lo), g(out$hi), g(out$se), sep = ","))
  case_lines[j] <- paste(id, out$status, out$k, g(out$edf), g(out$sig2), paste0("\"", out$message, "\""), sep = ",")
}

writeLines(c("id,i,est,lo,hi,se", pred_lines), file.path(dir, "mgcv.csv"))
writeLines(c("id,status,k,edf,sig2,message", case_lines), file.path(dir, "mgcv-cases.csv"))
cat(sprintf("mgcv %s: %d cases, %d failed\n", as.character(packageVersion("mgcv")), nrow(cases),
            sum(!grepl("^[^,]*,ok,", case_lines))))
