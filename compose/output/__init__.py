"""Writers: PNG, GeoTIFF, legend and reports, all written to a temporary name and renamed."""
