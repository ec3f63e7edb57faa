"""``python -m texgen.cli``: the ``texgen`` command."""
import sys

from . import main

sys.exit(main())
