"""Geostatistics: variograms, kriging, the unit surfaces and the probabilities."""
