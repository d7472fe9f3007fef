"""Shipped reference data other than optical constants (illumination spectra, demo studies)."""
