#!/usr/bin/env Rscript
# Write two open data sets shipped with Debian's R packages as CSV (x,y,z) for test/heldout.test.ts.
#
# Usage:  Rscript test/reference/open_data.R DIR
#   DIR/topo.csv   MASS::topo (Debian r-cran-mass): 52 spot heights; x, y in units of 50 feet,
#                  z in feet (Davis 1973, Statistics and Data Analysis in Geology, as cited in ?topo).
#   DIR/meuse.csv  sp::meuse (Debian r-cran-sp): 155 topsoil samples of the Meuse flood plain;
#                  x, y in metres (Dutch RD grid), z = zinc in ppm (mg/kg).
suppressPackageStartupMessages({ library(MASS); library(sp) })
dir <- commandArgs(trailingOnly = TRUE)[1]
data(topo, package = "MASS", envir = environment())
data(meuse, package = "sp", envir = environment())
out <- function(d, name) {
  lines <- sprintf("%.17g,%.17g,%.17g", d$x, d$y, d$z)
  writeLines(c("x,y,z", lines), file.path(dir, name))
}
out(data.frame(x = topo$x, y = topo$y, z = topo$z), "topo.csv")
out(data.frame(x = meuse$x, y = meuse$y, z = meuse$zinc), "meuse.csv")
cat(sprintf("MASS %s, sp %s\n", as.character(packageVersion("MASS")), as.character(packageVersion("sp"))))
