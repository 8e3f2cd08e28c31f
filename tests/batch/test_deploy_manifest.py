"""The Kubernetes example manifest parses and points at routes the service really has."""

from __future__ import annotations

from pathlib import Path

import pytest

yaml = pytest.importorskip("yaml")
MANIFEST = Path(__file__).resolve().parents[2] / "deploy" / "kubernetes.yaml"


def test_manifest_deployment_probes_and_autoscaler_fit_together(app):
    docs = {d["kind"]: d for d in yaml.safe_load_all(MANIFEST.read_text())}
    assert {"Deployment", "Service", "HorizontalPodAutoscaler"} <= set(docs)
    deployment, hpa = docs["Deployment"], docs["HorizontalPodAutoscaler"]
    container = deployment["spec"]["template"]["spec"]["containers"][0]
    routes = {rule.rule for rule in app.url_map.iter_rules()}
    for probe in ("readinessProbe", "livenessProbe"):
        assert container[probe]["httpGet"]["path"] in routes
    assert hpa["spec"]["scaleTargetRef"]["name"] == deployment["metadata"]["name"]
    assert hpa["spec"]["metrics"][0]["resource"]["name"] == "cpu"
    env = {e["name"]: e["value"] for e in container["env"]}
    from service.config import Settings

    names = {f"CURVEWISE_{f.upper()}" for f in Settings.__dataclass_fields__}
    assert set(env) <= names  # every variable is one the service reads
    assert deployment["spec"]["selector"]["matchLabels"].items() <= \
        deployment["spec"]["template"]["metadata"]["labels"].items()
