"""The numeric model: elementary functions, evaluation backends, sampling and the per-site analysis."""
