# Export R data sets shipped in Debian's r-cran-* packages to plain CSV.
#
# Usage: Rscript export_r_data.R LIBDIR OUTDIR
#   LIBDIR  the usr/lib/R/site-library folder of the unpacked .deb files
#   OUTDIR  where <name>.csv files are written
#
# Only base R is used (the .rda files are read with load()). Unordered factors
# are written as their labels; ordered factors as 0-based level positions (the
# COIL 2000 codes, see build_open_data.py); numbers with 15 significant digits.
args <- commandArgs(trailingOnly = TRUE)
lib <- args[1]
out <- args[2]
dir.create(out, showWarnings = FALSE, recursive = TRUE)

export <- function(pkg, obj, name) {
  e <- new.env()
  load(file.path(lib, pkg, "data", paste0(obj, ".rda")), envir = e)
  d <- get(obj, envir = e)
  for (n in names(d)) {
    x <- d[[n]]
    if (is.ordered(x)) {
      d[[n]] <- as.integer(x) - 1L
    } else if (is.factor(x)) {
      d[[n]] <- as.character(x)
    }
  }
  if (anyNA(d)) stop(paste(name, "has missing values"))
  write.csv(d, file.path(out, paste0(name, ".csv")), row.names = FALSE, na = "NA")
}

export("kernlab", "spam", "spam")
export("kernlab", "ticdata", "ticdata")
export("mlbench", "Shuttle", "shuttle")
export("mlbench", "LetterRecognition", "letter")
# Only for the cross-check of the KEEL satimage copy in build_open_data.py.
export("mlbench", "Satellite", "satellite")
