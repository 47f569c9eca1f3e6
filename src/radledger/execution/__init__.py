"""Where and how the work runs: the engine (the only place that computes), the chunk graph of a job,\nand the events a run reports."""
