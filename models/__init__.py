"""surgesift models package."""
