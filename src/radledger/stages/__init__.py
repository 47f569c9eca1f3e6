"""The stages of a run, each over the plan: the dated jobs, composites, zone tables, NetCDF stacks,
quicklooks.  The runner calls them in order; each uses the engine for every computation."""
