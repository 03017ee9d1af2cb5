"""Role names of API tokens, and which of them a protocol may ask to sign off a stage.

Bottom layer: the protocol loader validates sign-off rules against ``SIGNOFF_ROLES`` and the
service grants sign-offs to the same roles, so a protocol can only require what someone can give.
"""

from __future__ import annotations

ROLES = ("pipeline", "site", "coordinator", "viewer", "admin")
"""Every role a token can hold."""

SIGNOFF_ROLES = ("coordinator", "site")
"""Roles whose members may sign off a stage (``admin`` may act, but signs as ``admin``)."""
