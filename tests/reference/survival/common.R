# Shared helpers for the survival reference scripts (sourced, not run on its own).
#
# Every script is run as `Rscript tests/reference/survival/<name>.R <output folder>` (check.sh does
# this for all of them) and writes its input data as CSV and its results as JSON into that folder.
# Numbers are rounded to 12 significant digits so the files are byte-for-byte reproducible; the
# Rust tests compare at 1e-6 (closed forms) or 1e-4 (iterative fits), far above that rounding.

suppressPackageStartupMessages({
  library(survival)
  library(jsonlite)
})

args <- commandArgs(trailingOnly = TRUE)
if (length(args) != 1) stop("usage: Rscript <script>.R <output folder>")
out_dir <- args[[1]]
dir.create(out_dir, showWarnings = FALSE, recursive = TRUE)

script_name <- function() {
  file_arg <- grep("^--file=", commandArgs(trailingOnly = FALSE), value = TRUE)
  paste0("tests/reference/survival/", basename(sub("^--file=", "", file_arg)))
}

# Who produced the numbers: recorded inside every JSON fixture.
provenance <- function(extra = list()) {
  c(list(
    script = script_name(),
    r_version = R.version.string,
    survival_version = as.character(packageVersion("survival"))
  ), extra)
}

round_all <- function(x) {
  if (is.list(x)) {
    lapply(x, round_all)
  } else if (is.numeric(x)) {
    out <- signif(x, 12)
    out
  } else {
    x
  }
}

write_fixture <- function(object, name) {
  text <- toJSON(round_all(object), digits = NA, na = "null", auto_unbox = TRUE,
                 pretty = TRUE, matrix = "rowmajor")
  writeLines(text, file.path(out_dir, name), useBytes = TRUE)
}

write_input <- function(data, name) {
  # write.csv prints doubles with 15 significant digits; NA stays "NA".
  write.csv(data, file.path(out_dir, name), row.names = FALSE, quote = FALSE)
}

# Kaplan-Meier curve of one survfit stratum as plain vectors (log and log-log intervals at `level`).
km_table <- function(fit_log, fit_loglog) {
  list(
    time = fit_log$time,
    n_risk = fit_log$n.risk,
    n_event = fit_log$n.event,
    n_censor = fit_log$n.censor,
    surv = fit_log$surv,
    std_err_log = fit_log$std.err,
    lower_log = fit_log$lower,
    upper_log = fit_log$upper,
    lower_loglog = fit_loglog$lower,
    upper_loglog = fit_loglog$upper
  )
}
