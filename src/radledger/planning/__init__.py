"""From a validated config to a plan: the grid, every input's decoding, the jobs, the checks, and
each product's identity and provenance tags."""
