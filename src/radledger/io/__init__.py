"""Reading and writing files: paths and remote access, GDAL settings, raster sources, COG products,
vectors, tables and atomic writes.  Nothing here knows the run config."""
