"""The logbook: nightly usage per site, readings taken on subsystems, and append-only service records."""
