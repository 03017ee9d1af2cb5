"""``python -m confirm_service.cli``: the same as the ``confirm-service`` command."""

from confirm_service.cli import main

main()
