# Reference numbers for stance-rates: empirical Bayes rates on the North Carolina SIDS counties
# (SID74 cases over BIR74 births), from R spdep. Writes tests/reference/data/rates_nc_spdep.json.
# Run from the repository root: Rscript tests/reference/make_rates.R (or `make reference`).
# Data: sf's nc.gpkg (Debian r-cran-sf), copied to tests/reference/data/nc.gpkg; features in
# file order (fid 1..100).
suppressMessages({
  library(sf)
  library(spdep)
  library(jsonlite)
})
nc <- st_read("tests/reference/data/nc.gpkg", quiet = TRUE)
nb <- poly2nb(nc, queen = TRUE)  # spdep's default snap (sqrt of machine epsilon)
global <- EBest(nc$SID74, nc$BIR74)
binomial <- EBest(nc$SID74, nc$BIR74, family = "binomial")
# Local EB with the local prior variance measured as each neighbour's spread around area i's
# local mean, s2_i = sum_j n_j (r_j - m_i)^2 / sum_j n_j (Marshall 1991): EBlocal's sixth
# argument (after zero.policy and spChk) selects that variant; it is passed by position.
local_marshall <- EBlocal(nc$SID74, nc$BIR74, nb, NULL, NULL, TRUE)
# The default variant sums each neighbour's spread around its own local mean (r_j - m_j)^2.
local_default <- EBlocal(nc$SID74, nc$BIR74, nb)
out <- list(
  source = "R spdep EBest / EBlocal on sf nc.gpkg (SID74 over BIR74), queen poly2nb",
  script = "tests/reference/make_rates.R",
  r_version = paste(R.version$major, R.version$minor, sep = "."),
  spdep_version = as.character(packageVersion("spdep")),
  sf_version = as.character(packageVersion("sf")),
  fips = nc$FIPS,
  sid74 = nc$SID74,
  bir74 = nc$BIR74,
  # Neighbour lists, 0-based indices into the features' order.
  queen = lapply(nb, function(l) if (length(l) == 1 && l[1] == 0) integer(0) else as.integer(l - 1)),
  queen_links = sum(card(nb)),
  raw = global$raw,
  global_poisson = global$estmm,
  global_poisson_prior_mean = attr(global, "parameters")$b,
  global_poisson_prior_variance = attr(global, "parameters")$a,
  global_binomial = binomial$estmm,
  local_marshall = local_marshall$est,
  local_marshall_prior_mean = attr(local_marshall, "parameters")$m,
  local_marshall_prior_variance = attr(local_marshall, "parameters")$a,
  local_default = local_default$est
)
dir.create("tests/reference/data", showWarnings = FALSE, recursive = TRUE)
writeLines(toJSON(out, digits = I(17), auto_unbox = TRUE, pretty = TRUE),
           "tests/reference/data/rates_nc_spdep.json")
cat("max relative difference, EBlocal default vs spread around the local mean:",
    max(abs(local_default$est - local_marshall$est) / local_marshall$est), "\n")
