"""Doppler predictions and visibility windows over HTTP."""

from __future__ import annotations

from flask import Blueprint

bp = Blueprint("physics", __name__, url_prefix="/api/v1")
