"""The valuation model: splines, penalised least squares, interactions, pooling, references, runs."""

BASE_TERM = "(base)"  # the stored name of a parcel's intercept part (its contributions add up to its log value)
