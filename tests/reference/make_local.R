# Reference numbers for stance-local on the North Carolina SIDS counties from R spdep (Debian
# r-cran-spdep) on tests/reference/data/nc.gpkg, queen contiguity (poly2nb): global join counts
# with their analytic moments under non-free sampling (joincount.test, joincount.multi), local
# join counts (local_joincount_uni, local_joincount_bv) and Getis-Ord Gi / Gi* z-scores (localG,
# with include.self for Gi*) under binary and row-standardised weights.
# Binary variables as in make_local.py: high = SID79/BIR79 > median; low = <= first quartile
# (R quantile type 7, the same as numpy's default); nonwhite = NWBIR79/BIR79 > median.
# Writes tests/reference/data/local_nc_spdep.json. Run through `make reference`.
suppressMessages({ library(sf); library(spdep); library(jsonlite) })
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))
nc <- st_read(file.path(here, "data", "nc.gpkg"), quiet = TRUE)
rate <- nc$SID79 / nc$BIR79
share <- nc$NWBIR79 / nc$BIR79
high <- as.integer(rate > median(rate))
low <- as.integer(rate <= quantile(rate, 0.25, type = 7))
nonwhite <- as.integer(share > median(share))
queen <- poly2nb(nc, queen = TRUE)
lwb <- nb2listw(queen, style = "B")

jc <- joincount.test(factor(high), lwb)
stat <- function(t) list(statistic = unname(t$estimate[1]), expected = unname(t$estimate[2]),
                         variance = unname(t$estimate[3]), z = unname(t$statistic), p = t$p.value)
multi <- joincount.multi(factor(high), lwb)
row <- function(name) list(statistic = unname(multi[name, "Joincount"]),
                           expected = unname(multi[name, "Expected"]),
                           variance = unname(multi[name, "Variance"]),
                           z = unname(multi[name, "z-value"]))
set.seed(1)
uni <- local_joincount_uni(factor(high), chosen = "1", listw = lwb, nsim = 999)
# spdep's bivariate case without co-location needs z = 1 - x; with co-location it is CLC.
set.seed(1)
bv <- local_joincount_bv(high, 1L - high, listw = lwb, nsim = 999)
set.seed(1)
clc <- local_joincount_bv(high, nonwhite, listw = lwb, nsim = 999)
g <- function(x, nb, style) {
  as.numeric(localG(x, nb2listw(nb, style = style)))
}
queen_self <- include.self(queen)
out <- list(source = "R spdep", spdep_version = as.character(packageVersion("spdep")),
  sf_version = as.character(packageVersion("sf")), r_version = R.version.string,
  script = "tests/reference/make_local.R", rate = "SID79 / BIR79",
  high = high, low = low, nonwhite = nonwhite,
  joincount_test_white = stat(jc[[1]]), joincount_test_black = stat(jc[[2]]),
  multi_rownames = rownames(multi),
  multi_bb = row("1:1"), multi_ww = row("0:0"), multi_bw = row("1:0"),
  local_uni_join_count = unname(uni[, 1]), local_uni_p_999 = unname(uni[, 2]),
  local_bv_high_nothigh_join_count = unname(bv[, 1]),
  local_clc_high_nonwhite_join_count = unname(clc[, 1]),
  localg_binary = g(rate, queen, "B"), localg_row = g(rate, queen, "W"),
  localg_star_binary = g(rate, queen_self, "B"), localg_star_row = g(rate, queen_self, "W"))
writeLines(toJSON(out, digits = I(17), auto_unbox = TRUE, null = "null", na = "null"),
           file.path(here, "data", "local_nc_spdep.json"))
print(multi)
print(jc)
