"""The fictional demo planet Orrin in the service: stored at start-up, its plates built in the
background (coarse mesh, seconds), next to the demo plate.

Orrin (``stressmap/data/demo_network.geojson`` and ``demo_network.toml``) is a FICTIONAL planet
invented for demonstrations and tests; its name says so wherever it appears.
"""

from __future__ import annotations

import json
import logging
from importlib import resources

from stressmap_api.network_store import NetworkStore, build_network_job

from stressmap.io.network_files import load_network_files

__all__ = ["demo_network_document", "ensure_demo_network", "example_network_requests"]

_log = logging.getLogger(__name__)


def demo_network_document() -> dict:
    """The packaged demo network document (a fresh copy)."""
    data = resources.files("stressmap.data")
    return load_network_files(data / "demo_network.geojson", data / "demo_network.toml")


def ensure_demo_network(nstore: NetworkStore, jobs) -> tuple[str, str | None]:
    """(id of the stored demo network, id of its build job or None when already built).

    A demo network stored before from the same document is reused.
    """
    document = demo_network_document()
    canonical = json.dumps(document, sort_keys=True)
    network_id = None
    for entry in nstore.list():
        path = nstore.path(entry["id"]) / "network.json"
        if path.is_file() and json.dumps(json.loads(path.read_text(encoding="utf-8")),
                                         sort_keys=True) == canonical:
            network_id = entry["id"]
            break
    if network_id is None:
        network_id = nstore.add(document)
    if nstore.meta(network_id)["status"] == "ready":
        return network_id, None
    job_id = jobs.submit("network-build", build_network_job, str(nstore.root.parent), network_id)
    nstore.set_build_job(network_id, job_id)
    _log.info("building the demo network %s (job %s)", network_id, job_id)
    return network_id, job_id


def example_network_requests(base_url: str, network_id: str, token_header: bool = False) -> list[str]:
    """curl commands for the demo network that work as printed against a running service."""
    auth = ' -H "Authorization: Bearer $STRESSMAP_API_TOKEN"' if token_header else ""
    body = json.dumps({"region": {"bbox": [-40, -30, 40, 30]}, "spacing_km": 500, "format": "csv"})
    return [
        f"curl -s{auth} {base_url}/api/v1/networks/{network_id}/plates",
        f"curl -s{auth} -X POST {base_url}/api/v1/networks/{network_id}/predict "
        f"-H 'Content-Type: application/json' -d '{body}'",
    ]
