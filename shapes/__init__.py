"""truepull.shapes."""
