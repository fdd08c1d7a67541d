# Reference for stance-density --type-probabilities (Diggle, Zheng & Durr 2005, Applied
# Statistics 54: 645-658): spatstat's relrisk(casecontrol = FALSE) type probabilities at the data
# points (leave-one-out) and at the cell centres (exact sums per type), segregation.test's statistic and p-value, and
# bw.relrisk's likelihood cross-validation curve, on 150 points of three types placed at the
# centres of 50 m cells of a 1 km square. Gaussian kernel, sigma 300 m; edge correction off (it
# cancels in the type probabilities for one common bandwidth). Every pair of points is closer
# than 5 sigma, so the Gaussian truncation of stance-density's direct sums plays no part.
#
# Run from the repository root:  Rscript tests/reference/make_segregation.R
# Writes tests/reference/data/segregation.json.
suppressMessages(library(spatstat))
set.seed(2005)
n <- 150
cx <- 25 + 50 * sample(0:19, n, replace = TRUE)
cy <- 25 + 50 * sample(0:19, n, replace = TRUE)
# Type 1 (oppose) more likely in the west, type 3 (support) in the east.
u <- cx / 1000
p <- cbind(0.5 - 0.3 * u, rep(0.3, n), 0.2 + 0.3 * u)
type <- apply(p, 1, function(pr) sample(1:3, 1, prob = pr))
labels <- c("oppose", "neutral", "support")[type]
X <- ppp(cx, cy, window = owin(c(0, 1000), c(0, 1000)),
         marks = factor(labels, levels = c("oppose", "neutral", "support")))
sigma <- 300
# Type probabilities at the 400 cell centres from exact Gaussian sums per type (densityfun; relrisk
# with leaveoneout = FALSE fails in this spatstat version): p_k = lambda_k / sum lambda.
gx <- rep(25 + 50 * (0:19), times = 20)
gy <- rep(25 + 50 * (0:19), each = 20)
lambda <- sapply(levels(marks(X)), function(k) {
  f <- densityfun(X[marks(X) == k], sigma = sigma, edge = FALSE)
  f(gx, gy)
})
prob_grid <- lambda / rowSums(lambda)
loo <- relrisk(X, sigma = sigma, at = "points", casecontrol = FALSE, leaveoneout = TRUE,
               edge = FALSE)
set.seed(1)
test <- segregation.test(X, sigma = sigma, nsim = 999, verbose = FALSE, edge = FALSE)
cv <- bw.relrisk(X, method = "likelihood", hmin = 60, hmax = 900, nh = 30)
out <- list(
  source = "spatstat relrisk / segregation.test / bw.relrisk, tests/reference/make_segregation.R",
  spatstat = as.character(packageVersion("spatstat")),
  spatstat_explore = as.character(packageVersion("spatstat.explore")),
  r = paste(R.version$major, R.version$minor, sep = "."),
  kernel = "gaussian", sigma_m = sigma, edge = FALSE,
  x = cx, y = cy, class = labels,
  grid_x = gx, grid_y = gy,
  prob_grid = lapply(1:3, function(k) unname(prob_grid[, k])),
  prob_leave_one_out = lapply(1:3, function(k) unname(loo[, k])),
  segregation_statistic = unname(test$statistic), segregation_p = test$p.value, nsim = 999,
  cv_sigma_m = as.numeric(cv), cv_h = attr(cv, "h"), cv_criterion = attr(cv, "cv"),
  cv_criterion_name = attr(cv, "criterion")
)
jsonlite::write_json(out, "tests/reference/data/segregation.json", digits = NA, auto_unbox = TRUE,
                     pretty = TRUE)
cat("T =", test$statistic, "p =", test$p.value, "cv sigma =", as.numeric(cv), "\n")
