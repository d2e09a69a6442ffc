"""What a ratio study's values were: the honesty label every stored study carries (no heavy imports, so
the app's start-up can use it)."""
from __future__ import annotations

SOURCE_LABELS = {
    "prior": "prior roll values",
    "model_in_sample": "in-sample model values (optimistic: the model saw these sales)",
    "model_out_of_fold": "out-of-fold model values (honest: each sale valued by a model that did not see it)",
    "final": "final roll values after overrides (the staged or certified batches: in-sample model values and the "
             "analyst's overrides)",
}
IN_SAMPLE_WARNING = ("In-sample statistics flatter the model: it was fitted to these very sales. "
                     "Only out-of-fold statistics may gate approval.")
FINAL_WARNING = ("Final values flatter the roll: the model's values on the roll were fitted to these very sales, and an "
                 "override may have been set knowing the sale. They show what goes on the roll; only out-of-fold "
                 "statistics may gate approval.")
