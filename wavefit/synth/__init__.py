"""Circuit responses with scope-like imperfections, for sample data, demos and tests."""
