"""Products built from finished products: per-pixel statistics, composites, zone tables, NetCDF stacks,\nquicklook maps and `radledger info`."""
