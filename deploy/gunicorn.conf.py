"""gunicorn settings for emf-assess: ``gunicorn -c deploy/gunicorn.conf.py``.

Configuration, not code: the bind address and worker count come from the
environment (``HOST``, ``PORT``, ``WEB_CONCURRENCY``); the application reads its own
``EMF_*`` variables.  No ``preload_app``: every worker runs ``create_app()`` itself,
so each builds its own database engine and no pooled connection crosses a fork.
"""

import os

# Read by OpenBLAS when a worker first imports numpy (workers inherit the master's
# environment): BLAS threads stop spinning after 2^4 cycles instead of ~0.1-0.2 s, so a
# numba field kernel started right after the charge-simulation solve gets both cores
# (benchmarks/README.md).  An operator's own setting wins.
os.environ.setdefault("OPENBLAS_THREAD_TIMEOUT", "4")

wsgi_app = "service:create_app()"
bind = f"{os.environ.get('HOST', '0.0.0.0')}:{os.environ.get('PORT', '8000')}"
workers = int(os.environ.get("WEB_CONCURRENCY", "2"))
threads = int(os.environ.get("GUNICORN_THREADS", "1"))
preload_app = False
timeout = int(os.environ.get("GUNICORN_TIMEOUT", "120"))  # a 20,001-point profile takes well under this
graceful_timeout = 20
# The application writes one JSON line per request (service.logs, EMF_LOG_REQUESTS); gunicorn's
# own text access log only when asked for (GUNICORN_ACCESSLOG=- for standard output).
accesslog = os.environ.get("GUNICORN_ACCESSLOG") or None
errorlog = "-"
loglevel = os.environ.get("EMF_LOG_LEVEL", "info").lower()
capture_output = True
# No runtime control socket (gunicorn >= 25.1): one shared default path would collide when
# several instances run on one host (the demo beside the tests); older versions ignore the name.
control_socket_disable = True


# Prometheus multi-process mode: every worker writes its samples to files in one folder and
# /metrics adds them up (prometheus-client). The folder must be empty when the master starts;
# an operator may point PROMETHEUS_MULTIPROC_DIR elsewhere (it is then emptied the same way).
def on_starting(server):
    import shutil
    import tempfile

    folder = os.environ.setdefault("PROMETHEUS_MULTIPROC_DIR", tempfile.mkdtemp(prefix="emf-metrics-"))
    os.makedirs(folder, exist_ok=True)
    for name in os.listdir(folder):
        path = os.path.join(folder, name)
        if name.endswith(".db"):
            os.remove(path)
        elif os.path.isdir(path):
            shutil.rmtree(path)


def child_exit(server, worker):
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)
