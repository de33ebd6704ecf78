"""Lots: spec limits, decision rules (ILAC-G8), lot statistics, resumable output."""
