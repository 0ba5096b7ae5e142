"""surgesift service package."""
