"""surgesift detectors package."""
