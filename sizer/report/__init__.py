"""Reports of a finished design: tables, plots, HTML, CSV/XLSX and JSON files."""
