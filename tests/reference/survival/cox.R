# Cox proportional-hazards reference values from R's survival package (coxph), for
# crates/kcohort-stats/tests/reference_survival.rs.
#
# Inputs are the CSV files written by kaplan_meier.R and log_rank.R (same columns); this script
# rebuilds them from the survival package's data sets, so it does not depend on their files.
# Writes cox.json: per fit the coefficients, model-based and robust (cluster) standard errors and
# variance matrices, log partial likelihoods at 0 and at the estimate, the likelihood-ratio, score
# and Wald tests, the robust score test and hazard-ratio intervals.

source(file.path(dirname(sub("^--file=", "", grep("^--file=", commandArgs(FALSE), value = TRUE))), "common.R"))

lung01 <- data.frame(time = lung$time, status = lung$status - 1, sex = lung$sex, age = lung$age,
                     ph_ecog = lung$ph.ecog, inst = lung$inst)
ovarian01 <- data.frame(futime = ovarian$futime, fustat = ovarian$fustat, age = ovarian$age,
                        resid_ds = ovarian$resid.ds, rx = ovarian$rx, ecog_ps = ovarian$ecog.ps)
veteran01 <- data.frame(trt = veteran$trt, celltype = as.integer(veteran$celltype),
                        time = veteran$time, status = veteran$status, karno = veteran$karno,
                        diagtime = veteran$diagtime, age = veteran$age, prior = veteran$prior)
heart01 <- data.frame(start = heart$start, stop = heart$stop, event = heart$event,
                      age = heart$age, year = heart$year, surgery = heart$surgery,
                      transplant = as.integer(as.character(heart$transplant)), id = heart$id)

# `columns` names the CSV columns the Rust side reads: entry (or NA), exit, event, covariates,
# strata (or NA), cluster (or NA). Rows with a missing value in any of them are dropped, as
# coxph does by default.
fit_record <- function(label, input, columns, fit, level = 0.95) {
  z <- qnorm(1 - (1 - level) / 2)
  robust <- !is.null(fit$naive.var)
  naive_var <- if (robust) fit$naive.var else fit$var
  se <- sqrt(diag(naive_var))
  use_se <- sqrt(diag(fit$var))
  rec <- c(list(label = label, input = input), columns, list(
    ties = fit$method,
    n = fit$n, n_events = fit$nevent,
    coefficients = unname(fit$coefficients),
    std_errors = unname(se),
    variance = unname(naive_var),
    loglik_null = fit$loglik[1], loglik = fit$loglik[2],
    likelihood_ratio = 2 * (fit$loglik[2] - fit$loglik[1]),
    score_test = unname(fit$score),
    wald_test = as.numeric(coxph.wtest(naive_var, fit$coefficients)$test),
    df = length(fit$coefficients),
    level = level,
    hazard_ratio_lower = unname(exp(fit$coefficients - z * use_se)),
    hazard_ratio_upper = unname(exp(fit$coefficients + z * use_se))
  ))
  if (robust) {
    rec$robust_std_errors <- unname(sqrt(diag(fit$var)))
    rec$robust_variance <- unname(fit$var)
    rec$robust_wald_test <- as.numeric(fit$wald.test)
    rec$robust_score_test <- unname(fit$rscore)
  }
  rec
}

cols <- function(exit, event, covariates, entry = NA, strata = NA, cluster = NA) {
  list(entry = entry, exit = exit, event = event, covariates = covariates,
       strata = strata, cluster = cluster)
}

lung_cc <- subset(lung01, !is.na(ph_ecog))
lung_inst <- subset(lung01, !is.na(inst))
fits <- list()
for (ties in c("efron", "breslow")) {
  fits[[length(fits) + 1]] <- fit_record(
    paste("lung ~ sex", ties), "lung.csv", cols("time", "status", c("sex")),
    coxph(Surv(time, status) ~ sex, data = lung01, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("lung ~ sex + age + ph.ecog", ties), "lung.csv",
    cols("time", "status", c("sex", "age", "ph_ecog")),
    coxph(Surv(time, status) ~ sex + age + ph_ecog, data = lung_cc, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("lung ~ age + ph.ecog + strata(sex)", ties), "lung.csv",
    cols("time", "status", c("age", "ph_ecog"), strata = "sex"),
    coxph(Surv(time, status) ~ age + ph_ecog + strata(sex), data = lung_cc, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("lung ~ sex + age, cluster(inst)", ties), "lung.csv",
    cols("time", "status", c("sex", "age"), cluster = "inst"),
    coxph(Surv(time, status) ~ sex + age, data = lung_inst, cluster = inst, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("ovarian ~ age + resid.ds + rx + ecog.ps", ties), "ovarian.csv",
    cols("futime", "fustat", c("age", "resid_ds", "rx", "ecog_ps")),
    coxph(Surv(futime, fustat) ~ age + resid_ds + rx + ecog_ps, data = ovarian01, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("veteran ~ trt + karno + age + prior + strata(celltype)", ties), "veteran.csv",
    cols("time", "status", c("trt", "karno", "age", "prior"), strata = "celltype"),
    coxph(Surv(time, status) ~ trt + karno + age + prior + strata(celltype), data = veteran01,
          ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("heart (start, stop] ~ age + year + surgery + transplant, cluster(id)", ties),
    "heart.csv",
    cols("stop", "event", c("age", "year", "surgery", "transplant"), entry = "start",
         cluster = "id"),
    coxph(Surv(start, stop, event) ~ age + year + surgery + transplant, data = heart01,
          cluster = id, ties = ties))
  fits[[length(fits) + 1]] <- fit_record(
    paste("heart (start, stop] ~ age + transplant, 90%", ties), "heart.csv",
    cols("stop", "event", c("age", "transplant"), entry = "start"),
    coxph(Surv(start, stop, event) ~ age + transplant, data = heart01, ties = ties),
    level = 0.90)
}

write_fixture(list(
  source = provenance(list(call = "coxph(Surv(...) ~ ..., ties = 'efron' | 'breslow', cluster = ...), default coxph.control()")),
  fits = fits
), "cox.json")
