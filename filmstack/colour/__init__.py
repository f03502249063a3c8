"""Colorimetry of coatings and films, colour requirements, thickness from colour."""
