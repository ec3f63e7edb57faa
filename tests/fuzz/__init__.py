"""Fuzzing of texgen's input stages: seeded mutations of the library's spacetime files."""
