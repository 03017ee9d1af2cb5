"""gunicorn settings for production: ``gunicorn -c deploy/gunicorn.conf.py``."""

import multiprocessing
import os

bind = os.environ.get("CONFIRM_BIND", "127.0.0.1:8080")
workers = int(os.environ.get("CONFIRM_WORKERS", max(2, multiprocessing.cpu_count())))
wsgi_app = "confirm_service.wsgi:app"
timeout = 120  # a 50,000-detection batch takes well under a second; leave room for slow disks
accesslog = "-"
errorlog = "-"
limit_request_line = 8190
