"""Who may do what: the role sets shared by the API and the web pages.

``admin`` may always act; these sets name the other roles. Tests hold a hand-written copy of
the matrix (tests/api/test_roles_and_openapi.py) so that a change here is a visible decision.
"""

from __future__ import annotations

from confirm_service.roles import SIGNOFF_ROLES

READ = ("viewer", "pipeline", "site", "coordinator", "admin")
INGEST = ("pipeline",)
REGISTER = ("coordinator",)
PROMOTE = ("coordinator", "pipeline")
SIGNOFF = SIGNOFF_ROLES
COMMENT = ("coordinator", "site")
DECIDE = ("coordinator",)
RELEASE_HOLD = ("coordinator",)
REOPEN = ("coordinator",)
REPORT = ("site", "coordinator")
CHECKPOINT = ("coordinator",)
