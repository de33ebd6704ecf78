"""Reports: text table, JSON, CSV rows and plots."""
