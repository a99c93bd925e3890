"""truepull.integrate."""
