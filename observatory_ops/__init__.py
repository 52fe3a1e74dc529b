"""observatory_ops: maintenance and service-schedule tracking for small observatories."""
