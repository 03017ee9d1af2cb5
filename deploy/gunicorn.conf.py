"""gunicorn settings for production: ``gunicorn -c deploy/gunicorn.conf.py``.

Every answer is problem+json, gunicorn's own included (see ``confirm_service/serving.py`` for
what gunicorn does that no setting changes).
"""

import multiprocessing
import os

bind = os.environ.get("CONFIRM_BIND", "127.0.0.1:8080")
workers = int(os.environ.get("CONFIRM_WORKERS", max(2, multiprocessing.cpu_count())))
wsgi_app = "confirm_service.wsgi:app"
timeout = 120  # a 50,000-detection batch takes well under a second; leave room for slow disks
graceful_timeout = 30
accesslog = "-"
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
