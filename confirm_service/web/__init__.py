"""The coordinators' web pages, served under ``/dashboard`` (blueprint ``bp``)."""

from confirm_service.web.views import bp

__all__ = ["bp"]
