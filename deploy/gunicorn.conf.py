"""gunicorn settings for production: ``gunicorn -c deploy/gunicorn.conf.py``.

Every answer is problem+json, gunicorn's own included (see ``confirm_service/serving.py`` for
what gunicorn does that no setting changes).
"""

import multiprocessing
import os
import tempfile
from pathlib import Path

bind = os.environ.get("CONFIRM_BIND", "127.0.0.1:8080")
workers = int(os.environ.get("CONFIRM_WORKERS", max(2, multiprocessing.cpu_count())))
wsgi_app = "confirm_service.wsgi:app"
timeout = 120  # a 50,000-detection batch takes well under a second; leave room for slow disks
graceful_timeout = 30
# The application writes one JSON line per request (CONFIRM_REQUEST_LOG); gunicorn's own access
# log would repeat it in another shape, so it is off unless asked for.
accesslog = os.environ.get("CONFIRM_GUNICORN_ACCESS_LOG") or None
errorlog = "-"
# Request limits, answered by gunicorn itself (414 and 431, as problem+json through the hook).
limit_request_line = 8190
limit_request_fields = 100
limit_request_field_size = 8190
# Behind a reverse proxy on the same host (deploy/nginx-confirm-service.conf), trust its
# X-Forwarded-* headers only from loopback.
forwarded_allow_ips = os.environ.get("CONFIRM_FORWARDED_ALLOW_IPS", "127.0.0.1")


def post_fork(server, worker):  # noqa: ARG001 - gunicorn's hook signature
    from confirm_service.serving import answer_gunicorn_errors_as_problems

    answer_gunicorn_errors_as_problems()


# Prometheus multiprocess mode: every worker writes its metric values to files in this folder
# and /api/v1/metrics sums them. The folder is gunicorn's alone and is emptied when gunicorn
# starts (prometheus-client's rule for multiprocess mode); without the variable, a private
# temporary folder is made.
if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix="confirm-metrics-")


def on_starting(server):  # noqa: ARG001 - gunicorn's hook signature
    for stale in Path(os.environ["PROMETHEUS_MULTIPROC_DIR"]).glob("*.db"):
        stale.unlink()


def child_exit(server, worker):  # noqa: ARG001 - gunicorn's hook signature
    from confirm_service.metrics import worker_exited

    worker_exited(worker.pid)
