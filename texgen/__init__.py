"""texgen: exact curvature, physical analysis and derivation reports from YAML spacetime files.

The pipeline's stages are sub-packages, each importing only those before it:
``spec`` (the file read and frozen into a model) → ``engine`` (exact curvature) →
``physics`` (what it means; claims) → ``output`` (reports, JSON, figures) →
``library`` (many entries, versions, cache) → ``cli``.  The public API is
:mod:`texgen.api`; its most used names are here.
"""
from __future__ import annotations

from ._version import __version__ as __version__
from .api import BuildOptions as BuildOptions
from .api import ReportWriter as ReportWriter
from .api import build_report as build_report
from .api import derive as derive
from .api import load_spacetime as load_spacetime
from .api import load_spacetime_text as load_spacetime_text
from .errors import BudgetExceeded as BudgetExceeded
from .errors import ClaimFailed as ClaimFailed
from .errors import ConfigError as ConfigError
from .errors import ConfigErrors as ConfigErrors
from .errors import DerivationError as DerivationError
from .errors import RenderError as RenderError
from .errors import TexgenError as TexgenError
from .spec.model import Spacetime as Spacetime
