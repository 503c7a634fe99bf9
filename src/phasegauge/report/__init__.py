"""Reports: tables, plots, the HTML page and the manifest."""
