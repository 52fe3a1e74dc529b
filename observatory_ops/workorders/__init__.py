"""Work orders: steps, parts, hazard-driven cautions, lifting figures, lifecycle and printable PDF."""
