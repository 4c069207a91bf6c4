"""Sensible-heat methods with an image-wide calibration: pass-1 reduction, pass-2 block function."""
