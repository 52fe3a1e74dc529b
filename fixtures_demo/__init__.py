"""Seeded generator of the demo scenario (an invented observatory, people and coordinates)."""
