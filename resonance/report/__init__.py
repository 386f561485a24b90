"""Report and edge writers: results.json, scan tables, plots and the PDF report."""
