"""causalcheck: may this correlation be read as a cause?

The user API, re-exported from the modules that hold each concept:

- :func:`load_study`, :func:`parse_study` — study files (:mod:`causalcheck.study`)
- :func:`identify` — identification from the causal graph (:mod:`causalcheck.graph`)
- :func:`vet` — vetting a published table against hidden confounding (:mod:`causalcheck.vet`)
- :func:`plan` — planning a study before data exist: what to measure (:mod:`causalcheck.plan`)
- :func:`review_text` — the causal-language review of a report's text (:mod:`causalcheck.wording`)
"""

__version__ = "0.1.0"

from .audit import AuditResult, audit  # noqa: E402
from .errors import CausalCheckError  # noqa: E402
from .graph import Identification, identify  # noqa: E402
from .plan import PlanResult, plan  # noqa: E402
from .study import Study, load_study, parse_study  # noqa: E402
from .vet import VetResult, vet  # noqa: E402
from .wording import WordingReview, review_text  # noqa: E402

__all__ = ["__version__", "AuditResult", "CausalCheckError", "Identification", "PlanResult",
           "Study", "VetResult", "WordingReview", "audit", "identify", "load_study",
           "parse_study", "plan", "review_text", "vet"]
