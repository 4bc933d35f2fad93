"""The caution every output carries (summary.json, study, comparison, report, verification)."""

CAUTION = ("Linear-elastic, small-displacement analysis. Results depend on the idealised supports, "
           "loads and mesh; they are no substitute for the judgement of a licensed engineer or for "
           "the governing codes and standards.")
