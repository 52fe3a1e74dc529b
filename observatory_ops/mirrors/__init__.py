"""Mirrors: geometry, coating and cleaning history, reflectance measurements, decline and recoat plans."""
