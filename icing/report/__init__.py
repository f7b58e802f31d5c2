"""Reports of an assessment: text table, JSON, CSV, GeoJSON (and, with matplotlib, plots and HTML)."""
