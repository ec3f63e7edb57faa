"""Report sections and JSON blocks of the later stages, one module per stage (see :mod:`texgen.output.stages`)."""
