# Log-rank reference values from R's survival package (survdiff, rho = 0), for
# crates/kcohort-stats/tests/reference_survival.rs.
#
# Writes: veteran.csv (input; aml.csv, lung.csv and ovarian.csv come from kaplan_meier.R, same
# columns) and log_rank.json: observed and expected per group (summed over strata), the variance
# matrix of O - E, the chi-square, its degrees of freedom and p-value.

source(file.path(dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))), "common.R"))

veteran01 <- data.frame(trt = veteran$trt, celltype = as.integer(veteran$celltype),
                        time = veteran$time, status = veteran$status, karno = veteran$karno,
                        diagtime = veteran$diagtime, age = veteran$age, prior = veteran$prior)
write_input(veteran01, "veteran.csv")

lung01 <- data.frame(time = lung$time, status = lung$status - 1, sex = lung$sex,
                     ph_ecog = lung$ph.ecog)
aml01 <- data.frame(time = aml$time, status = aml$status,
                    maintained = as.integer(aml$x == "Maintained"))

# Groups are passed to survdiff as integer codes, so their order (the order of observed/expected)
# is the sorted order of the codes.
test <- function(label, fit, input, group, strata = NULL) {
  obs <- if (is.matrix(fit$obs)) rowSums(fit$obs) else fit$obs
  exp <- if (is.matrix(fit$exp)) rowSums(fit$exp) else fit$exp
  list(label = label, input = input, group = group, strata = if (is.null(strata)) NA else strata,
       groups = as.numeric(sub(".*=", "", names(fit$n))),
       n = as.vector(fit$n), observed = as.vector(obs), expected = as.vector(exp),
       variance = unname(fit$var), chisq = fit$chisq,
       df = sum(exp > 0) - 1, p_value = pchisq(fit$chisq, sum(exp > 0) - 1, lower.tail = FALSE))
}

tests <- list(
  test("aml by maintained", survdiff(Surv(time, status) ~ maintained, data = aml01),
       "aml.csv", "maintained"),
  test("lung by sex", survdiff(Surv(time, status) ~ sex, data = lung01), "lung.csv", "sex"),
  test("lung by sex, strata ph.ecog",
       survdiff(Surv(time, status) ~ sex + strata(ph_ecog), data = subset(lung01, !is.na(ph_ecog))),
       "lung.csv", "sex", "ph_ecog"),
  test("veteran by celltype", survdiff(Surv(time, status) ~ celltype, data = veteran01),
       "veteran.csv", "celltype"),
  test("veteran by trt, strata celltype",
       survdiff(Surv(time, status) ~ trt + strata(celltype), data = veteran01),
       "veteran.csv", "trt", "celltype")
)

write_fixture(list(
  source = provenance(list(call = "survdiff(Surv(time, status) ~ group [+ strata(s)], rho = 0)")),
  tests = tests
), "log_rank.json")
