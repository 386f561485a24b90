"""Harmonic scans and penetration: frequency grids, sparse engine, peaks, screening."""
