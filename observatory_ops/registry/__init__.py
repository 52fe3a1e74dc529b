"""The register: sites, telescopes and the tree of subsystems, with the catalogue of subsystem kinds."""
