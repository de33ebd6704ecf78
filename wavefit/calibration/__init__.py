"""Calibrations of the bench: channel comparison and reference-part substitution."""
