# Reference values for the linear baseline (method 'linear'), from R's own lm() and
# glm(). Run from the repository root:
#
#     Rscript testdata/reference/linear_reference.R
#
# It (re)writes testdata/longley.csv, testdata/mtcars_am.csv and
# testdata/reference/linear_reference.json, using only R's base packages (datasets,
# stats) and jsonlite, all in Debian's r-base-core / r-cran-jsonlite.
longley_csv <- "testdata/longley.csv"
mtcars_csv <- "testdata/mtcars_am.csv"
out_json <- "testdata/reference/linear_reference.json"

# Longley (1967): 16 rows; the NIST StRD "Longley" problem regresses Employed on the
# other six columns. The numbers are written as R prints them (at most 7 digits).
l <- datasets::longley
names(l) <- c("gnp_deflator", "gnp", "unemployed", "armed_forces", "population", "year", "employed")
write.csv(l, longley_csv, row.names = FALSE, quote = FALSE)
fit <- lm(employed ~ gnp_deflator + gnp + unemployed + armed_forces + population + year, data = l)
ls <- summary(fit)$coefficients

# mtcars: transmission (am: 0 automatic, 1 manual) on weight and horsepower.
m <- data.frame(wt = mtcars$wt, hp = mtcars$hp, am = ifelse(mtcars$am == 1, "manual", "automatic"))
write.csv(m, mtcars_csv, row.names = FALSE, quote = FALSE)
g <- glm(I(am == "manual") ~ wt + hp, family = binomial, data = m,
         control = glm.control(epsilon = 1e-14, maxit = 100))
gs <- summary(g)$coefficients

terms <- function(s, names) {
  lapply(seq_len(nrow(s)), function(i) list(
    term = names[i],
    estimate = sprintf("%.17g", s[i, 1]), std_error = sprintf("%.17g", s[i, 2]),
    z = sprintf("%.17g", s[i, 3]), p_value = sprintf("%.17g", s[i, 4])))
}
res <- list(
  generated_by = list(r = R.version.string, jsonlite = as.character(packageVersion("jsonlite"))),
  longley_lm = terms(ls, c("(intercept)", names(l)[1:6])),
  mtcars_glm = list(iterations = g$iter, terms = terms(gs, c("(intercept)", "wt", "hp")))
)
writeLines(jsonlite::toJSON(res, auto_unbox = TRUE, pretty = TRUE), out_json)
