"""causalcheck: may this correlation be read as a cause?

The user API, re-exported from the modules that hold each concept:

- :func:`load_study`, :func:`parse_study` — study files (:mod:`causalcheck.study`)
- :func:`controls` — identification from the causal graph (:mod:`causalcheck.graph`)
"""

__version__ = "0.1.0"

from .errors import CausalCheckError  # noqa: E402
from .study import Study, load_study, parse_study  # noqa: E402

__all__ = ["__version__", "CausalCheckError", "Study", "load_study", "parse_study"]
