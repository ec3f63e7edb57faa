"""texgen: exact curvature, physical analysis and derivation reports from YAML spacetime files."""
from __future__ import annotations

__version__ = "0.1.0"

from .api import load_spacetime as load_spacetime
from .api import load_spacetime_text as load_spacetime_text
from .errors import ConfigError as ConfigError
from .errors import DerivationError as DerivationError
from .errors import RenderError as RenderError
from .errors import TexgenError as TexgenError
from .model import Spacetime as Spacetime
