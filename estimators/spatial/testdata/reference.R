# Independent reference values for the spatial package's tests, computed
# with Debian's R packages r-cran-spatstat.explore (3.0-6) and
# r-cran-vegan (2.6-4). Run from this directory:
#
#   Rscript reference.R
#
# It writes the point patterns it uses (points_*.csv) and the reference
# outputs (reference_nn.csv, reference_morisita.csv). Those files are
# committed; the Go tests read them and never run R.
suppressMessages({
  library(spatstat.explore)
  library(vegan)
})
options(digits = 15)

# --- Clark-Evans on published point patterns shipped with spatstat.data:
# cells (Ripley 1977, after Crick: 42 cell centres, unit square),
# japanesepines (Numata 1961, via Diggle 1983: 65 pines, unit square),
# redwood (Strauss 1975 / Ripley 1977: 62 seedlings, unit square).
nn <- data.frame()
for (name in c("cells", "japanesepines", "redwood")) {
  X <- get(name)
  W <- Window(X)
  stopifnot(W$type == "rectangle")
  write.csv(data.frame(x = X$x, y = X$y), sprintf("points_%s.csv", name), row.names = FALSE)
  ce <- clarkevans(X, correction = c("none", "Donnelly"))
  t0 <- clarkevans.test(X, correction = "none", alternative = "two.sided")
  nn <- rbind(nn, data.frame(
    dataset = name, n = npoints(X), area = area(W), perimeter = perimeter(W),
    xmin = W$xrange[1], xmax = W$xrange[2], ymin = W$yrange[1], ymax = W$yrange[2],
    mean_nn = mean(nndist(X)), R_none = ce[["naive"]], R_donnelly = ce[["Donnelly"]],
    p_none = t0$p.value))
}
write.csv(nn, "reference_nn.csv", row.names = FALSE)

# --- Morisita's index, its clumped and uniform indices and the
# standardized index (vegan::dispindmorisita), plus the index of
# dispersion test, on count vectors named in the Go tests.
bees <- rep(0:10, c(114, 25, 15, 10, 6, 5, 2, 1, 1, 0, 1))
vectors <- list(
  bees = bees,
  clumped10 = c(0, 0, 12, 1, 0, 0, 9, 0, 2, 0),
  even10 = c(3, 3, 2, 3, 3, 4, 3, 3, 3, 2),
  one8 = c(20, 0, 0, 0, 0, 0, 0, 0),
  mixed10 = c(2, 1, 3, 0, 2, 4, 1, 2, 3, 2),
  sparse6 = c(1, 0, 2, 0, 1, 0)
)
mo <- data.frame()
for (name in names(vectors)) {
  x <- vectors[[name]]
  n <- length(x)
  d <- dispindmorisita(matrix(x, ncol = 1))
  chi <- (n - 1) * var(x) / mean(x)
  p2 <- min(1, 2 * min(pchisq(chi, n - 1), pchisq(chi, n - 1, lower.tail = FALSE)))
  mo <- rbind(mo, data.frame(
    name = name, counts = paste(x, collapse = " "), n = n, total = sum(x),
    mean = mean(x), variance = var(x), vmr = var(x) / mean(x), chisq = chi, p_two_sided = p2,
    imor = d$imor, mclu = d$mclu, muni = d$muni, imst = d$imst))
}
write.csv(mo, "reference_morisita.csv", row.names = FALSE)
