"""What ``stressmap screen`` and ``stressmap well`` share: the site's model and its stress options."""

from __future__ import annotations

from stressmap.io.networkdir import read_any_model

__all__ = ["load_site_model", "add_orientation_options", "add_friction_options"]


def load_site_model(directory):
    """The built model (or network) at ``directory`` and the provenance results carry;
    ``(None, None)`` without one."""
    if not directory:
        return None, None
    model = read_any_model(directory)
    summary = getattr(model, "summary", {}) or {}
    return model, {"directory": str(directory), "name": summary.get("name"),
                   "build_time": summary.get("build_time")}


def add_orientation_options(group) -> None:
    """SHmax azimuth, regime and shape ratio, overriding the model's at the site."""
    group.add_argument("--shmax-azimuth-deg", type=float, help="SHmax azimuth, degrees from north")
    group.add_argument("--regime", choices=["normal", "strike-slip", "reverse"])
    group.add_argument("--shape-ratio", type=float, help="(S2-S3)/(S1-S3) in [0, 1]")


def add_friction_options(group) -> None:
    """Friction coefficient and fault cohesion at the site."""
    group.add_argument("--friction", type=float, help="friction coefficient (default 0.6)")
    group.add_argument("--cohesion-mpa", type=float, help="fault cohesion, MPa (default 0)")
