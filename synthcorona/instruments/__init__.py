"""Instrument models: optics, filters, detectors and telescope responses."""
