#!/usr/bin/env python3
"""Check deploy/k8s: every manifest listed in kustomization.yaml and every listed file present;
each manifest valid against the Kubernetes 1.37 schemas bundled in kubernetes-validate (strict:
unknown fields are errors); and the production rules of issue 6 (replicas, probes, non-root,
read-only root filesystem, no capabilities, seccomp, resources). Exit 1 on any failure."""

import pathlib
import sys

import kubernetes_validate
import yaml

K8S_VERSION = "1.37.0"
HERE = pathlib.Path(__file__).resolve().parent / "k8s"


def main() -> int:
    failures = []
    kust = yaml.safe_load((HERE / "kustomization.yaml").read_text())
    listed = set(kust.get("resources", []))
    present = {p.name for p in HERE.glob("*.yaml") if p.name != "kustomization.yaml"}
    for name in sorted(present - listed):
        failures.append(f"{name} is not listed in kustomization.yaml")
    for name in sorted(listed - present):
        failures.append(f"kustomization.yaml lists {name}, which does not exist")
    docs = {}
    for name in sorted(present & listed):
        for doc in yaml.safe_load_all((HERE / name).read_text()):
            if doc is None:
                continue
            try:
                kubernetes_validate.validate(doc, K8S_VERSION, strict=True)
                print(f"ok   {name}: {doc['kind']}/{doc['metadata']['name']}")
            except kubernetes_validate.ValidationError as e:
                failures.append(f"{name}: {e.message} at {'.'.join(map(str, e.path))}")
            docs[doc["kind"]] = doc
    dep = docs.get("Deployment")
    if dep is None:
        failures.append("no Deployment")
    else:
        spec = dep["spec"]
        pod = spec["template"]["spec"]
        c = pod["containers"][0]
        sc = c.get("securityContext", {})
        checks = {
            "2+ replicas": spec.get("replicas", 1) >= 2,
            "pod runAsNonRoot": pod.get("securityContext", {}).get("runAsNonRoot") is True,
            "seccomp RuntimeDefault": pod.get("securityContext", {}).get("seccompProfile", {}).get("type")
            == "RuntimeDefault",
            "container runAsNonRoot": sc.get("runAsNonRoot") is True,
            "readOnlyRootFilesystem": sc.get("readOnlyRootFilesystem") is True,
            "no privilege escalation": sc.get("allowPrivilegeEscalation") is False,
            "drop ALL capabilities": sc.get("capabilities", {}).get("drop") == ["ALL"],
            "requests and limits": all(k in c.get("resources", {}) for k in ("requests", "limits")),
            "liveness on /livez": c.get("livenessProbe", {}).get("httpGet", {}).get("path") == "/livez",
            "readiness on /readyz": c.get("readinessProbe", {}).get("httpGet", {}).get("path") == "/readyz",
            "startup probe": "startupProbe" in c,
            "listens on 0.0.0.0:8080": {"name": "CALCIUM_CDS_LISTEN", "value": "0.0.0.0:8080"} in c.get("env", []),
            "workbench off in production": {"name": "CALCIUM_CDS_WORKBENCH", "value": "false"} in c.get("env", []),
        }
        for what, ok in checks.items():
            print(f"{'ok  ' if ok else 'FAIL'} Deployment: {what}")
            if not ok:
                failures.append(f"Deployment: {what}")
    hpa = docs.get("HorizontalPodAutoscaler")
    if hpa is None or hpa["spec"].get("minReplicas", 1) < 2:
        failures.append("a HorizontalPodAutoscaler with minReplicas >= 2 is required")
    if "PodDisruptionBudget" not in docs:
        failures.append("a PodDisruptionBudget is required")
    # /notifications makes the service call the EHR with its credential: the base either turns
    # inbound authorization on or restricts who may reach the pods (issue 14).
    env = docs["Deployment"]["spec"]["template"]["spec"]["containers"][0].get("env", []) if dep else []
    auth_on = {"name": "CALCIUM_CDS_AUTH", "value": "true"} in env
    np = docs.get("NetworkPolicy")
    restricted = (
        np is not None
        and "Ingress" in np["spec"].get("policyTypes", [])
        and all(rule.get("from") for rule in np["spec"].get("ingress", []))
    )
    ok = auth_on or restricted
    print(f"{'ok  ' if ok else 'FAIL'} inbound authorization on, or a NetworkPolicy restricting ingress")
    if not ok:
        failures.append("inbound authorization on, or a NetworkPolicy restricting ingress, is required")
    for f in failures:
        print(f"FAIL {f}")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
