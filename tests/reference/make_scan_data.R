# Exports the humberside case-control point pattern (childhood leukaemia and lymphoma, North
# Humberside 1974-82; Cuzick & Edwards 1990) from Debian's r-cran-spatstat.data to
# tests/reference/data/humberside.json, for the scan-statistic reference checks.
# Run from the repository root: Rscript tests/reference/make_scan_data.R
suppressPackageStartupMessages({ library(spatstat.data); library(spatstat.geom) })
data(humberside)
x <- humberside$x
y <- humberside$y
marks <- as.character(humberside$marks)
num <- function(v) paste(sprintf("%.17g", v), collapse = ", ")
str <- function(v) paste0('"', v, '"', collapse = ", ")
out <- file.path("tests", "reference", "data", "humberside.json")
writeLines(c(
  "{",
  sprintf('  "source": "R package spatstat.data %s, data(humberside); exported by tests/reference/make_scan_data.R",',
          as.character(packageVersion("spatstat.data"))),
  sprintf('  "units": "%s",', paste(unitname(humberside)$singular, collapse = " ")),
  sprintf('  "x": [%s],', num(x)),
  sprintf('  "y": [%s],', num(y)),
  sprintf('  "marks": [%s]', str(marks)),
  "}"
), out)
cat("wrote", out, "with", length(x), "points\n")
