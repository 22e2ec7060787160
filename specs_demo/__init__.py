"""The invented demo delivery specs (YAML), shipped with the package for ``masterqc demo``."""
