"""Post-processing: results and summary, error estimates, the temperature map and the
output writers."""
