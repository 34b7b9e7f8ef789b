"""``convsim rayleigh``: Rayleigh numbers and scales of a layer from its physical properties."""

from __future__ import annotations

from convsim.cli.common import command, emit_json


_RAYLEIGH_FLAGS = (  # (units.Scales field, option, meaning, SI units, example); no pint at parse
    ("depth", "--depth", "layer depth d", "m", "2900 km"),
    ("temperature_contrast", "--temperature-contrast", "temperature difference dT", "K",
     "2500 K"),
    ("surface_temperature", "--surface-temperature", "top temperature (default 0)", "K",
     "300 K"),
    ("gravity", "--gravity", "gravity g", "m s^-2", "9.8 m/s^2"),
    ("density", "--density", "density rho", "kg m^-3", "4000 kg/m^3"),
    ("expansivity", "--expansivity", "thermal expansivity alpha", "K^-1", "3e-5 1/K"),
    ("diffusivity", "--diffusivity", "thermal diffusivity kappa", "m^2 s^-1", "1e-6 m^2/s"),
    ("conductivity", "--conductivity", "thermal conductivity k", "W m^-1 K^-1", "4 W/m/K"),
    ("reference_viscosity", "--viscosity", "reference viscosity eta_ref", "Pa s", "1e21 Pa s"),
    ("heat_production", "--heat-production", "heat production per unit mass (default 0)",
     "W kg^-1", "5e-12 W/kg"),
    ("activation_energy", "--activation-energy", "Arrhenius activation energy (default 0)",
     "kJ mol^-1", "60 kJ/mol"),
    ("activation_volume", "--activation-volume", "Arrhenius activation volume (default 0)",
     "cm^3 mol^-1", "5 cm^3/mol"),
    ("maximum_viscosity", "--maximum-viscosity", "upper cut-off of the viscosity (default 0)",
     "Pa s", "1e22 Pa s"),
)

_RAYLEIGH_CAUTION = ("research estimate: Ra grows as d^3 / eta and the inputs, the viscosity "
                     "above all, are uncertain by orders of magnitude; so are these numbers")


@command("rayleigh", "Rayleigh numbers and scales of a layer from its physical properties")
def _add_rayleigh(p):
    p.add_argument("config", nargs="?", help="TOML config; its [body] table gives the properties "
                   "(command-line values win)")
    for name, flag, meaning, si, example in _RAYLEIGH_FLAGS:
        p.add_argument(flag, dest=f"body_{name}", metavar="VALUE",
                       help=f"{meaning}: a number in {si} or with units, e.g. '{example}'")
    p.add_argument("--boundaries", metavar="FLOW",
                   help="mechanical conditions: free-slip, no-slip (both sides) or TOP,BOTTOM "
                        "such as 'free-slip,no-slip'; default: the config's, else free-slip")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=_run_rayleigh)


def _rayleigh_boundaries(text, cfg):
    from convsim.errors import ConfigError
    from convsim.units import FLOW_CONDITIONS
    if text is None:
        if cfg is None:
            return "free-slip", "free-slip"
        return cfg.boundaries.top_flow, cfg.boundaries.bottom_flow
    parts = [part.strip() for part in text.split(",")]
    if len(parts) == 1:
        parts = parts * 2
    if len(parts) != 2 or not all(part in FLOW_CONDITIONS for part in parts):
        raise ConfigError(f"--boundaries = {text!r}: expected free-slip, no-slip or TOP,BOTTOM "
                          f"with each one of {', '.join(FLOW_CONDITIONS)}")
    return parts[0], parts[1]


def _run_rayleigh(args) -> int:
    result, scales, origin = _rayleigh_result(args)
    if args.json:
        emit_json(result)
    else:
        _print_rayleigh(result, scales, origin)
    return 0


def _rayleigh_result(args):
    """The answer as a JSON-ready dict, with the Scales and where each property came from."""
    from convsim import units
    from convsim.config import load_config

    cfg = load_config(args.config) if args.config else None
    body = cfg.body if cfg is not None else None
    given, origin = {}, {}
    for name, flag, *_ in _RAYLEIGH_FLAGS:
        text = getattr(args, f"body_{name}")
        if text is not None:
            given[name] = units.parse_property(name, text, key=flag)
            origin[name] = "command line"
    scales = units.scales_from_body(body, given,
                                    options={name: flag for name, flag, *_ in _RAYLEIGH_FLAGS})
    for prop in units.PROPERTIES:
        if prop.name not in origin:
            from_body = body is not None and getattr(body, prop.body_key, 0.0) != 0.0
            origin[prop.name] = "config" if from_body else "default"
    top, bottom = _rayleigh_boundaries(args.boundaries, cfg)
    ra, h_nd, ra_h = (scales.rayleigh(), scales.internal_heating_number(),
                      scales.internal_heating_rayleigh())
    layer_cfg = _rayleigh_layer(cfg, scales, top, bottom)
    onset = _rayleigh_onset(layer_cfg, h_nd, box=cfg is not None)
    result = {
        "rayleigh": ra, "rayleigh_reference": layer_cfg.physics.rayleigh_reference,
        "rayleigh_numbers": onset.pop("rayleigh_numbers"), "viscosity": _law_dict(layer_cfg),
        "internal_heating_number": h_nd, "internal_heating_rayleigh": ra_h,
        "properties": {p.name: {"value": getattr(scales, p.name), "units": p.units,
                                "from": origin[p.name]} for p in units.PROPERTIES},
        "scales": {"length_km": scales.length_to_km(1.0),
                   "time_myr": scales.time_to_myr(1.0), "time_s": scales.time_scale,
                   "velocity_cm_per_yr": scales.velocity_to_cm_per_yr(1.0),
                   "velocity_m_per_s": scales.velocity_scale,
                   "heat_flux_mw_m2": scales.heat_flux_to_mw_m2(1.0),
                   "temperature_contrast_k": scales.temperature_contrast,
                   "surface_temperature_k": scales.surface_temperature,
                   "viscosity_pa_s": scales.reference_viscosity},
        "onset": onset, "caution": _RAYLEIGH_CAUTION,
    }
    return result, scales, origin


def _print_rayleigh(result: dict, scales, origin: dict) -> None:
    from convsim import units
    sc, onset = result["scales"], result["onset"]
    ra, h_nd, ra_h = (result[k] for k in ("rayleigh", "internal_heating_number",
                                          "internal_heating_rayleigh"))
    top, bottom, ra_c = onset["top_flow"], onset["bottom_flow"], onset["critical_rayleigh"]
    lines = ["properties (SI):"]
    for p in units.PROPERTIES:
        lines.append(f"  {p.name:<22s} {getattr(scales, p.name):<12.6g} {p.units:<12s} "
                     f"({origin[p.name]})")
    lines += [
        f"Ra   = {ra:<11.4g} rho g alpha dT d^3 / (kappa eta_ref), eta_ref at the "
        f"{result['rayleigh_reference']}",
        "  Ra at the top {top:.4g}, bottom {bottom:.4g}, interior {interior:.4g}".format(
            **result["rayleigh_numbers"]),
        f"  viscosity law: {_law_text(result['viscosity'])}",
        f"H_nd = {h_nd:<11.4g} rho H d^2 / (k dT)",
        f"Ra_H = {ra_h:<11.4g} rho g alpha (rho H) d^5 / (k kappa eta_ref) = Ra H_nd",
        "scales:",
        f"  length       {sc['length_km']:<11.4g} km      d",
        f"  time         {sc['time_myr']:<11.4g} Myr     d^2 / kappa",
        f"  velocity     {sc['velocity_cm_per_yr']:<11.4g} cm/yr   kappa / d",
        f"  heat flux    {sc['heat_flux_mw_m2']:<11.4g} mW/m^2  k dT / d (times Nu or q)",
        f"  temperature  T_dim = {scales.surface_temperature:.6g} K + "
        f"{scales.temperature_contrast:.6g} K x T",
        f"onset ({onset['source']}):",
        f"  Ra_c = {ra_c:.6g} (at the {result['rayleigh_reference']}; {top} top, {bottom} "
        f"bottom), Ra / Ra_c = {onset['ratio']:.4g}: "
        + ("above onset, convecting" if onset["above_onset"] else "below onset, conduction only"),
    ]
    lines += [f"  note: {note}" for note in onset["notes"]]
    lines.append(f"caution: {_RAYLEIGH_CAUTION}")
    print("\n".join(lines))


def _rayleigh_layer(cfg, scales, top, bottom):
    """The config of the layer ``convsim rayleigh`` describes: Ra and any Arrhenius law from
    the (possibly overridden) properties, through the same resolution a run uses."""
    import dataclasses
    from convsim import units
    from convsim.config import Body, Config
    from convsim.run.layer import resolve
    base = cfg if cfg is not None else Config()
    body = Body(**{p.body_key: getattr(scales, p.name) for p in units.PROPERTIES})
    derived = {"physics.rayleigh"}            # the properties (flags included) decide these
    if scales.activation_energy > 0:
        derived |= {"viscosity.law", "viscosity.activation_energy",
                    "viscosity.activation_volume", "viscosity.temperature_offset"}
    if scales.maximum_viscosity > 0:
        derived.add("viscosity.maximum")
    base = dataclasses.replace(base, body=body, given=frozenset(base.given - derived))
    return resolve(base.replace(boundaries__top_flow=top, boundaries__bottom_flow=bottom))


def _rayleigh_onset(layer_cfg, h_nd, box: bool) -> dict:
    """Whether the layer convects, from the eigen-solver with its law and boundaries: against
    the box's critical Ra when a config gives the box (as ``convsim onset``), else against
    the unbounded layer's.  Rayleigh numbers at the config's rayleigh_reference."""
    from convsim.analysis.onset_runs import onset_from_config
    from convsim.run import layer
    result = onset_from_config(layer_cfg)
    ref = layer.internal_rayleigh(layer_cfg) / layer_cfg.physics.rayleigh   # eta at the ref.
    critical = (result.box_critical_rayleigh if box else result.critical_rayleigh) / ref
    ratio = layer_cfg.physics.rayleigh / critical
    notes = []
    if h_nd > 0.0 or layer_cfg.physics.internal_heating != 0.0:
        notes.append("the [body] heat production is not part of the onset problem; "
                     "physics.internal_heating is")
    b = layer_cfg.boundaries
    return {"top_flow": b.top_flow, "bottom_flow": b.bottom_flow,
            "critical_rayleigh": critical, "ratio": ratio, "above_onset": bool(ratio > 1.0),
            "layer_critical_rayleigh": result.critical_rayleigh / ref,
            "box_critical_rayleigh": result.box_critical_rayleigh / ref if box else None,
            "box_mode": result.box_mode if box else None,
            "aspect": result.aspect if box else None,
            "rayleigh_numbers": layer.rayleigh_numbers(layer_cfg),
            "source": "eigen-solver of the conductive state with the layer's viscosity law "
                      "and boundaries, " + ("in the config's box (as convsim onset)" if box
                                           else "unbounded layer"), "notes": notes}


def _law_dict(cfg) -> dict:
    import dataclasses
    return dataclasses.asdict(cfg.viscosity)


def _law_text(law: dict) -> str:
    if law["law"] == "arrhenius":
        return (f"arrhenius, E = {law['activation_energy']:.4g} dT, V = "
                f"{law['activation_volume']:.4g} dT, T0 = {law['temperature_offset']:.4g} dT")
    if law["law"] == "frank-kamenetskii":
        return (f"frank-kamenetskii, thermal contrast {law['thermal_contrast']:.4g}, depth "
                f"contrast {law['depth_contrast']:.4g}")
    return law["law"]
