"""The valuation model: splines, penalised least squares, interactions, pooling, references, runs."""

BASE_TERM = "(base)"  # the stored name of a parcel's intercept part (its contributions add up to its log value)
RANGE_WEIGHT = 0.5  # sales of lower weight do not stretch a layer's curves (hierarchy._counted; the roll's range flags)
POOLING_AREAS = "market areas' pooling toward the jurisdiction"  # names of the structure choices (run_structure.choice)
POOLING_SEGMENTS = "segments' pooling toward their market area"
THIN_CURVES = "thin segments' curves"
