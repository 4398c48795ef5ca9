"""Processing: pure functions on arrays, with physical units in the names and the formula in each docstring."""
