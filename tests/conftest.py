"""Test-wide settings.

Access control is on by default (``AUTH_REQUIRED``); the suite runs with it off
(``EMF_AUTH_REQUIRED=false``, inherited by the gunicorn and demo subprocesses) so every
test of the contract is the single-user one, and the access tests
(tests/service/test_access.py and the hostile-request table) turn it on explicitly.
"""

import os

os.environ.setdefault("EMF_AUTH_REQUIRED", "false")
