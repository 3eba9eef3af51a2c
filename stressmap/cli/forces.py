"""``stressmap forces``: the plate-driving force calculator.

Prints a table of force magnitudes per unit length of boundary (N/m) and the derived quantities
(thermal thickness, subsidence, seafloor depth, basal traction, ridge-push rate) for one set of
parameters; ``--json`` prints the same numbers as one JSON object for scripts. Every option
defaults to the packaged physics defaults (stressmap/data/defaults.toml); ``--params`` reads a
TOML or JSON file of overrides in the same sections.
"""

from __future__ import annotations

import argparse
import json
import tomllib
from pathlib import Path

from stressmap import validate
from stressmap.errors import InputError, problem
from stressmap.physics import forces, thermal

__all__ = ["register", "calculate", "format_table"]


def _number(lo: float | None = 0.0, hi: float | None = None, strict: bool = False):
    """An argparse type: a finite number within [lo, hi] (lo exclusive when ``strict``)."""

    def parse(text: str) -> float:
        problems: list = []
        value = validate.number(text, None, problems, text=True, required=True, low=lo, high=hi,
                                low_inclusive=not strict)
        if problems:  # argparse names the option in front of the message
            raise argparse.ArgumentTypeError(problems[0]["message"])
        return value

    return parse


#: Option destination -> (defaults.toml section, key) that supplies its default.
_DEFAULTS = {
    "age_myr": ("ridge_push", "age_myr"),
    "cooling_model": ("ridge_push", "model"),
    "slab_age_myr": ("slab_pull", "slab_age_myr"),
    "slab_depth_km": ("slab_pull", "slab_depth_km"),
    "pull_fraction": ("slab_pull", "pull_fraction"),
    "viscosity_pa_s": ("drag", "viscosity_pa_s"),
    "channel_km": ("drag", "channel_km"),
    "velocity_mm_yr": ("drag", "velocity_mm_yr"),
    "length_km": ("drag", "length_km"),
    "collision_stress_mpa": ("collision", "mean_stress_mpa"),
    "collision_depth_km": ("collision", "coupled_depth_km"),
    "transform_stress_mpa": ("transform", "mean_stress_mpa"),
    "transform_depth_km": ("transform", "coupled_depth_km"),
    "suction_stress_mpa": ("overriding", "mean_stress_mpa"),
    "suction_depth_km": ("overriding", "coupled_depth_km"),
}


def _h(text: str, defaults: dict, section: str, key: str) -> str:
    return f"{text} [default {defaults[section][key]:g}; {section}.{key}]" if not isinstance(
        defaults[section][key], str) else f"{text} [default {defaults[section][key]}; {section}.{key}]"


def register(subparsers) -> None:
    d = thermal.load_defaults()
    p = subparsers.add_parser(
        "forces",
        help="plate-driving force calculator (N/m) with thermal thickness and seafloor depth",
        description=(
            "Compute ridge push, slab pull, basal drag, collision, transform and trench-suction "
            "forces per unit length of boundary (N/m) and the derived cooling quantities for one "
            "set of parameters. Options left out take the packaged physics defaults (shown in "
            "brackets with the defaults.toml section.key that holds them); --params overrides any "
            "default from a file, and options given on the command line win over both."
        ),
    )
    g = p.add_argument_group("lithosphere and ridge push")
    g.add_argument("--age-myr", type=_number(), default=None,
                   help=_h("age of the oceanic lithosphere whose ridge push is computed, Myr", d, "ridge_push", "age_myr"))
    g.add_argument("--cooling-model", choices=sorted(thermal.MODELS), default=None,
                   help=_h("cooling model for ridge push and the derived quantities: half_space "
                           "(Turcotte & Schubert constants) or plate (GDH1, Stein & Stein 1992)",
                           d, "ridge_push", "model"))
    g = p.add_argument_group("slab pull")
    g.add_argument("--slab-age-myr", type=_number(), default=None,
                   help=_h("age of the subducting lithosphere at the trench, Myr", d, "slab_pull", "slab_age_myr"))
    g.add_argument("--slab-depth-km", type=_number(), default=None,
                   help=_h("vertical extent of the slab below the trench, km (dip does not matter)", d, "slab_pull", "slab_depth_km"))
    g.add_argument("--pull-fraction", type=_number(0.0, 1.0), default=None,
                   help=_h("share of the slab's negative buoyancy transmitted to the plate, 0-1", d, "slab_pull", "pull_fraction"))
    g = p.add_argument_group("basal drag (Couette shear of the asthenosphere)")
    g.add_argument("--viscosity-pa-s", type=_number(), default=None,
                   help=_h("viscosity of the sheared channel, Pa s", d, "drag", "viscosity_pa_s"))
    g.add_argument("--channel-km", type=_number(0.0, strict=True), default=None,
                   help=_h("thickness of the sheared channel, km", d, "drag", "channel_km"))
    g.add_argument("--velocity-mm-yr", type=_number(), default=None,
                   help=_h("plate velocity relative to the deep mantle, mm/yr", d, "drag", "velocity_mm_yr"))
    g.add_argument("--length-km", type=_number(), default=None,
                   help=_h("plate length over which the basal traction is integrated, km", d, "drag", "length_km"))
    g = p.add_argument_group("line forces (mean stress x coupled depth)")
    g.add_argument("--collision-stress-mpa", type=_number(), default=None,
                   help=_h("mean compressive stress carried across a collision zone, MPa", d, "collision", "mean_stress_mpa"))
    g.add_argument("--collision-depth-km", type=_number(), default=None,
                   help=_h("coupled depth of a collision zone, km", d, "collision", "coupled_depth_km"))
    g.add_argument("--transform-stress-mpa", type=_number(), default=None,
                   help=_h("mean shear stress on a transform fault, MPa", d, "transform", "mean_stress_mpa"))
    g.add_argument("--transform-depth-km", type=_number(), default=None,
                   help=_h("coupled (seismogenic) depth of a transform fault, km", d, "transform", "coupled_depth_km"))
    g.add_argument("--suction-stress-mpa", type=_number(), default=None,
                   help=_h("mean tensile stress of trench suction on an overriding plate, MPa", d, "overriding", "mean_stress_mpa"))
    g.add_argument("--suction-depth-km", type=_number(), default=None,
                   help=_h("coupled depth of trench suction, km", d, "overriding", "coupled_depth_km"))
    g = p.add_argument_group("output")
    g.add_argument("--params", type=Path, metavar="FILE",
                   help="TOML or JSON file of physics overrides in the sections of the packaged "
                        "defaults (e.g. [half_space] mantle_temperature_c = 1350); the options "
                        "above still win")
    g.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    p.set_defaults(handler=_run)


def _read_params(path: Path | None) -> dict | None:
    if path is None:
        return None
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read --params file {path}: {exc.strerror}",
                         [problem(f"cannot read: {exc.strerror}", field="--params")]) from None
    try:
        if path.suffix.lower() == ".json":
            data = json.loads(text)
        else:
            data = tomllib.loads(text)
    except (json.JSONDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"--params file {path} is not valid {'JSON' if path.suffix.lower() == '.json' else 'TOML'}: {exc}",
                         [problem(str(exc), field="--params")]) from None
    forces.resolve_params(data)  # validates section and key names with a message per problem
    return data


def calculate(args: argparse.Namespace) -> dict:
    """All calculator outputs as a JSON-able dict (``inputs``, ``forces_n_per_m``, ``derived``)."""
    params = _read_params(getattr(args, "params", None))
    resolved = forces.resolve_params(params)
    inputs = {}
    for dest, (section, key) in _DEFAULTS.items():
        value = getattr(args, dest, None)
        inputs[dest] = resolved[section][key] if value is None else value
    args = argparse.Namespace(**{**vars(args), **inputs})
    model = args.cooling_model
    if model not in thermal.MODELS:
        raise InputError(f"unknown cooling model {model!r} (use half_space or plate)",
                         [problem("must be half_space or plate", field="ridge_push.model")])
    age = args.age_myr
    c = thermal.model_constants(model, params)
    out_forces = {
        "ridge_push": float(forces.ridge_push_n_per_m(age, params, model=model)),
        "ridge_push_numeric": float(forces.ridge_push_numeric_n_per_m(age, model, params)),
        "slab_pull": float(forces.slab_pull_n_per_m(args.slab_age_myr, args.slab_depth_km, args.pull_fraction, params)),
        "slab_pull_full": float(forces.slab_pull_n_per_m(args.slab_age_myr, args.slab_depth_km, 1.0, params)),
        "basal_drag": float(forces.basal_drag_force_n_per_m(args.viscosity_pa_s, args.channel_km, args.velocity_mm_yr, args.length_km)),
        "collision_resistance": float(forces.line_force_n_per_m(args.collision_stress_mpa, args.collision_depth_km)),
        "transform_resistance": float(forces.line_force_n_per_m(args.transform_stress_mpa, args.transform_depth_km)),
        "trench_suction": float(forces.line_force_n_per_m(args.suction_stress_mpa, args.suction_depth_km)),
    }
    derived = {
        "ridge_push_rate_n_per_m_per_myr": float(forces.ridge_push_rate_n_per_m_per_myr(age, params, model=model)),
        "basal_drag_traction_pa": float(forces.basal_drag_traction_pa(args.viscosity_pa_s, args.channel_km, args.velocity_mm_yr)),
        "thermal_thickness_km": float(thermal.thermal_thickness_km(age, model, params)),
        "subsidence_km": float(thermal.subsidence_km(age, model, params)),
        "ridge_depth_km": c["ridge_depth_m"] / 1e3,
        "seafloor_depth_km": float(thermal.seafloor_depth_km(age, model, params)),
        "slab_density_anomaly_kg_m2": float(thermal.integrated_density_anomaly_kg_m2(args.slab_age_myr, resolved["slab_pull"]["model"], params)),
    }
    return {"inputs": inputs, "forces_n_per_m": out_forces, "derived": derived}


_ROWS = (
    ("forces_n_per_m", "ridge_push", "ridge push ({model}, analytic)", "N/m"),
    ("forces_n_per_m", "ridge_push_numeric", "ridge push (pressure integral)", "N/m"),
    ("forces_n_per_m", "slab_pull", "slab pull (transmitted)", "N/m"),
    ("forces_n_per_m", "slab_pull_full", "slab pull (full negative buoyancy)", "N/m"),
    ("forces_n_per_m", "basal_drag", "basal drag over plate length", "N/m"),
    ("forces_n_per_m", "collision_resistance", "collision resistance", "N/m"),
    ("forces_n_per_m", "transform_resistance", "transform resistance", "N/m"),
    ("forces_n_per_m", "trench_suction", "trench suction", "N/m"),
    ("derived", "ridge_push_rate_n_per_m_per_myr", "ridge-push rate dF/dt", "N/m per Myr"),
    ("derived", "basal_drag_traction_pa", "basal drag traction", "Pa"),
    ("derived", "thermal_thickness_km", "thermal thickness (0.9 isotherm)", "km"),
    ("derived", "subsidence_km", "subsidence below ridge crest", "km"),
    ("derived", "ridge_depth_km", "ridge-crest depth", "km"),
    ("derived", "seafloor_depth_km", "seafloor depth", "km"),
    ("derived", "slab_density_anomaly_kg_m2", "slab thermal mass excess", "kg/m^2"),
)


def format_table(result: dict) -> str:
    """The calculator result as an aligned plain-text table."""
    inp = result["inputs"]
    lines = [
        f"plate-driving forces for {inp['age_myr']:g} Myr lithosphere ({inp['cooling_model']} cooling); "
        f"slab {inp['slab_age_myr']:g} Myr, {inp['slab_depth_km']:g} km, fraction {inp['pull_fraction']:g}",
    ]
    labels = [label.format(model=inp["cooling_model"]) for _, _, label, _ in _ROWS]
    width = max(len(s) for s in labels)
    lines.append(f"{'quantity':<{width}}  {'value':>12}  unit")
    lines.append(f"{'-' * width}  {'-' * 12}  {'-' * 11}")
    for (section, key, _, unit), label in zip(_ROWS, labels):
        value = result[section][key]
        text = f"{value:12.4g}" if abs(value) < 1e4 else f"{value:12.3e}"
        lines.append(f"{label:<{width}}  {text}  {unit}")
    return "\n".join(lines)


def _run(args: argparse.Namespace) -> int:
    result = calculate(args)
    if args.json:
        print(json.dumps(result, indent=2))
    else:
        print(format_table(result))
    return 0
