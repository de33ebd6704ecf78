"""Waveform facts: state levels and edges, noise level, clipping."""
