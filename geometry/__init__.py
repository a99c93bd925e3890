"""truepull.geometry."""
