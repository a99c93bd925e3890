"""truepull.cli."""
