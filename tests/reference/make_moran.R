# Reference numbers for stance-weights and stance-moran on the North Carolina SIDS counties
# (SID74 over BIR74), from R spdep (Debian r-cran-spdep) and the copy of sf's nc.gpkg in
# tests/reference/data/nc.gpkg (identical to system.file("gpkg/nc.gpkg", package = "sf")).
# Writes tests/reference/data/moran_nc_spdep.json. Run through `make reference`.
suppressMessages({ library(sf); library(spdep); library(jsonlite) })
args <- commandArgs(trailingOnly = FALSE)
here <- dirname(normalizePath(sub("^--file=", "", args[grep("^--file=", args)])))
nc <- st_read(file.path(here, "data", "nc.gpkg"), quiet = TRUE)
x <- nc$SID74 / nc$BIR74

queen <- poly2nb(nc, queen = TRUE)
rook <- poly2nb(nc, queen = FALSE)
lists0 <- function(nb) lapply(nb, function(l) I(if (length(l) == 1 && l[1] == 0) integer(0) else as.integer(l - 1L)))

glob <- function(listw, randomisation, alternative) {
  t <- moran.test(x, listw, randomisation = randomisation, alternative = alternative)
  list(i = unname(t$estimate[1]), expected = unname(t$estimate[2]), variance = unname(t$estimate[3]),
       z = unname(t$statistic), p = t$p.value)
}
local <- function(listw, alternative) {
  l <- localmoran(x, listw, alternative = alternative)
  list(ii = unname(l[, 1]), expected = unname(l[, 2]), variance = unname(l[, 3]), z = unname(l[, 4]),
       p = unname(l[, 5]), quadrant_mean = as.character(attr(l, "quadr")$pysal))
}
out <- list(source = "R spdep", spdep_version = as.character(packageVersion("spdep")),
  sf_version = as.character(packageVersion("sf")), r_version = R.version.string,
  script = "tests/reference/make_moran.R", variable = "SID74 / BIR74", n = nrow(nc),
  fips = as.character(nc$FIPS),
  queen_links = sum(card(queen)), rook_links = sum(card(rook)),
  queen_lists = lists0(queen), rook_lists = lists0(rook))
for (style in c("W", "B")) {
  lw <- nb2listw(queen, style = style)
  key <- if (style == "W") "row" else "binary"
  out[[paste0("global_queen_", key)]] <- list(
    randomisation_greater = glob(lw, TRUE, "greater"),
    randomisation_two_sided = glob(lw, TRUE, "two.sided"),
    normality_greater = glob(lw, FALSE, "greater"))
  out[[paste0("local_queen_", key, "_two_sided")]] <- local(lw, "two.sided")
}
out[["local_queen_row_greater"]] <- local(nb2listw(queen, style = "W"), "greater")
set.seed(1)
eb <- EBImoran.mc(nc$SID74, nc$BIR74, nb2listw(queen, style = "W"), nsim = 999)
out$eb_index_queen_row <- list(statistic = unname(eb$statistic), p_greater_999 = eb$p.value,
  standardised_rate = unname(eb$z))
writeLines(toJSON(out, digits = NA, auto_unbox = TRUE), file.path(here, "data", "moran_nc_spdep.json"))
cat("queen", out$queen_links, "rook", out$rook_links, "I", out$global_queen_row$randomisation_greater$i, "\n")
