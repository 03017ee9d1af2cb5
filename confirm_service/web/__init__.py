"""The coordinators' web pages, served under ``/dashboard`` (blueprint ``bp``).

One module per page group adds its routes to the blueprint: ``pages_session`` (sign-in),
``pages_overview`` (attention, counts, search, list), ``pages_candidate`` (the decision screen),
``pages_sites``, ``pages_operations`` (follow-ups, screening, audit). ``plots`` draws the SVG
pictures; ``forms`` validates and submits forms; ``auth`` keeps sessions.
"""

from confirm_service.web import (  # noqa: F401  (each module adds its routes)
    pages_candidate,
    pages_operations,
    pages_overview,
    pages_session,
    pages_sites,
)
from confirm_service.web.blueprint import bp

__all__ = ["bp"]
