"""`padtune estimate`: predict a pad's signal and SNR behind an overlay, before any board exists.

A thin shell over `devices.estimate`: it turns options (or a pad of a board file) into an
`EstimateInput`, and prints a table on a terminal, plain lines when piped, or JSON with `--json`.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys

from devices import physics
from devices.boards import load_board
from devices.estimate import DEFAULT_COMPONENTS, Estimate, EstimateInput, estimate
from devices.materials import MATERIALS, get_material
from devices.methods import FILE_KEYS, Method, method_from_table
from protocol.errors import UserError


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "estimate", help="predict finger signal, count change and SNR behind an overlay",
        description="Predict the finger's capacitance change, the count change and the SNR of a pad behind "
        "an overlay, with the spread the material's permittivity range gives. Start from a board file's "
        "pad (--board, --pad) or from scratch; any option overrides.",
    )
    p.add_argument("--board", help="take pad, overlay, method and noise from this board (name or .toml)")
    p.add_argument("--pad", dest="pad_name", help="which pad of --board (default: its first)")
    p.add_argument("--pad-mm", help="rectangular pad size, WxH in mm (e.g. 12x12) or one side for a square "
                   "(default 12x12, or the --board pad)")
    p.add_argument("--pad-diameter-mm", type=float, help="round pad diameter in mm")
    p.add_argument("--parasitic-pf", type=float, help="pad parasitic capacitance in pF (default: estimated)")
    p.add_argument("--material", help=f"overlay material: {', '.join(MATERIALS)}")
    p.add_argument("--thickness-mm", type=float, help="overlay thickness in mm")
    p.add_argument("--air-gap-mm", type=float, help="air gap between pad and overlay in mm (default 0)")
    p.add_argument("--finger-mm", type=float, help="fingertip contact diameter in mm (default 10)")
    p.add_argument("--body-pf", type=float, help="body capacitance to ground in pF (default 200, standing)")
    p.add_argument("--isolated", action="store_true",
                   help=f"the person is insulated from ground (body {physics.BODY_ISOLATED_F * 1e12:g} pF)")
    p.add_argument("--method", choices=sorted(FILE_KEYS), help="conversion method (default charge_time)")
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help="a method component in file units, e.g. r_ohm=1e6, timing_pf=10, adc_bits=12 "
                   "(repeatable; see devices/README.md)")
    p.add_argument("--noise-pf", type=float, help="rms capacitance noise at the pad in pF (default 0.02)")
    p.add_argument("--noise-counts", type=float, help="rms noise after conversion in counts (default 0)")
    p.add_argument("--hum-pf", type=float, help="mains hum amplitude at the pad in pF (default 0)")
    p.add_argument("--json", action="store_true", help="print the estimate as JSON")
    p.set_defaults(func=run)


# The same bounds as board files (devices/boards/__init__.py), so an estimate and a board agree on sense.
MAX_THICKNESS_MM = 50.0
MAX_PAD_MM = 200.0
MAX_PARASITIC_PF = 1000.0
MAX_AIR_GAP_MM = 20.0
MAX_NOISE_PF = 100.0  # far past any pad's whole capacitance: a typo, not a board
MAX_NOISE_COUNTS = 1e6
FINGER_MM_RANGE = (1.0, 40.0)
BODY_PF_RANGE = (1.0, 2000.0)


def _finite(value: float | None, option: str) -> float | None:
    if value is not None and not math.isfinite(value):
        raise UserError(f"{option} must be a finite number, got {value:g}")
    return value


def _positive(value: float | None, option: str, high: float = math.inf) -> float | None:
    if _finite(value, option) is not None and not 0 < value <= high:  # type: ignore[operator]
        limit = f" and at most {high:g}" if high < math.inf else ""
        raise UserError(f"{option} must be above zero{limit}, got {value:g}")
    return value


def _within(value: float | None, option: str, bounds: tuple[float, float]) -> float | None:
    low, high = bounds
    if _finite(value, option) is not None and not low <= value <= high:  # type: ignore[operator]
        raise UserError(f"{option} must be from {low:g} to {high:g}, got {value:g}")
    return value


def _pad_area_m2(args: argparse.Namespace) -> float | None:
    if args.pad_mm and args.pad_diameter_mm:
        raise UserError("give either --pad-mm or --pad-diameter-mm, not both")
    if args.pad_diameter_mm is not None:
        diameter_mm = _positive(args.pad_diameter_mm, "--pad-diameter-mm", MAX_PAD_MM)
        return physics.pad_area_m2("circle", diameter_m=diameter_mm * 1e-3)  # type: ignore[operator]
    if args.pad_mm:
        parts = args.pad_mm.lower().split("x")
        try:
            sides = [float(s) for s in parts]
        except ValueError:
            sides = []
        if len(sides) not in (1, 2) or not all(0 < side <= MAX_PAD_MM for side in sides):
            raise UserError(f"--pad-mm {args.pad_mm!r}: write the size as WxH in mm, e.g. 12x12, or one side "
                            f"(each side above 0 and at most {MAX_PAD_MM:g} mm)")
        w, h = sides[0], sides[-1]
        return w * h * 1e-6
    return None


def _components(args: argparse.Namespace, kind: str, base: dict[str, float]) -> dict[str, float]:
    table = dict(base)
    for item in args.set:
        key, sep, raw = item.partition("=")
        try:
            value = float(raw)
        except ValueError:
            value = math.nan
        if not sep or not math.isfinite(value):
            raise UserError(f"--set {item!r}: write KEY=NUMBER, e.g. r_ohm=1e6")
        table[key.strip()] = value
    return table


def _from_board(args: argparse.Namespace) -> dict[str, object]:
    """EstimateInput fields taken from one pad of a board file (the starting point for overrides)."""
    spec = load_board(args.board)
    wanted = args.pad_name or spec.names[0]
    pad = next((p for p in spec.pads if p.name == wanted), None)
    if pad is None:
        raise UserError(f"--pad {args.pad_name!r}: {spec.name} has pads {', '.join(spec.names)}")
    return {"pad_area_m2": pad.area_m2, "parasitic_f": pad.parasitic_f, "material": spec.overlay.material,
            "thickness_m": spec.overlay.thickness_m, "air_gap_m": spec.overlay.air_gap_m,
            "method": spec.method, "finger_diameter_m": spec.finger.contact_diameter_m,
            "body_f": spec.finger.body_f, "noise_pf": spec.noise.white_pf,
            "noise_counts": spec.noise.counts_rms,
            "hum_pf": spec.noise.hum_pf * (1 + spec.noise.hum_harmonic2)}


def _method(args: argparse.Namespace, board_method: Method | None) -> Method:
    if board_method is not None and args.method in (None, board_method.kind):
        if not args.set:
            return board_method
        kind, base = board_method.kind, _file_units(board_method)
    else:
        kind = args.method or "charge_time"
        base = DEFAULT_COMPONENTS[kind]
    return method_from_table(kind, _components(args, kind, base), where="--set")


def _pad_and_parasitic(args: argparse.Namespace, fields: dict[str, object]) -> None:
    area = _pad_area_m2(args)
    if area is not None:
        fields["pad_area_m2"] = area
        fields.pop("parasitic_f", None)  # a new pad size: the board pad's parasitic no longer applies
    fields.setdefault("pad_area_m2", 1.44e-4)
    if args.parasitic_pf is not None:
        fields["parasitic_f"] = _positive(args.parasitic_pf, "--parasitic-pf", MAX_PARASITIC_PF) * 1e-12
    fields.setdefault("parasitic_f", physics.pad_parasitic_f(fields["pad_area_m2"]))  # type: ignore[arg-type]


def build_input(args: argparse.Namespace) -> EstimateInput:
    if args.pad_name and not args.board:
        raise UserError("--pad names a pad of a board file: give --board too")
    fields = _from_board(args) if args.board else {}
    fields["method"] = _method(args, fields.get("method"))  # type: ignore[arg-type]
    _pad_and_parasitic(args, fields)
    if args.material:
        fields["material"] = get_material(args.material)
    if args.thickness_mm is not None:
        fields["thickness_m"] = _positive(args.thickness_mm, "--thickness-mm", MAX_THICKNESS_MM) * 1e-3
    if "material" not in fields or "thickness_m" not in fields:
        raise UserError("say what the overlay is: --material NAME --thickness-mm T (or --board NAME)")
    if args.isolated and args.body_pf is not None:
        raise UserError("give either --isolated or --body-pf, not both")
    if args.isolated:
        fields["body_f"] = physics.BODY_ISOLATED_F
    overrides = {
        "air_gap_m": (_within(args.air_gap_mm, "--air-gap-mm", (0.0, MAX_AIR_GAP_MM)), 1e-3),
        "finger_diameter_m": (_within(args.finger_mm, "--finger-mm", FINGER_MM_RANGE), 1e-3),
        "body_f": (_within(args.body_pf, "--body-pf", BODY_PF_RANGE), 1e-12),
        "noise_pf": (_within(args.noise_pf, "--noise-pf", (0.0, MAX_NOISE_PF)), 1.0),
        "noise_counts": (_within(args.noise_counts, "--noise-counts", (0.0, MAX_NOISE_COUNTS)), 1.0),
        "hum_pf": (_within(args.hum_pf, "--hum-pf", (0.0, MAX_NOISE_PF)), 1.0),
    }
    for key, (value, factor) in overrides.items():
        if value is not None:
            fields[key] = value * factor
    return EstimateInput(**fields)  # type: ignore[arg-type]


def _file_units(method: Method) -> dict[str, float]:
    """The method's components back in file units (so --set can change one of a board's parts)."""
    out = {}
    for key, (arg, factor) in FILE_KEYS[method.kind].items():
        out[key] = getattr(method, arg) / factor
    return out


def _lines(e: Estimate) -> list[tuple[str, str]]:
    i = e.inputs
    sign = "+" if e.polarity > 0 else "-"
    return [
        ("pad", f"{i['pad_area_mm2']:.1f} mm2, parasitic {i['parasitic_pf']:.1f} pF"),
        ("overlay", f"{i['thickness_mm']:g} mm {i['material']} (er {i['er'][0]:g}, range {i['er'][1]:g}.."
                    f"{i['er'][2]:g}; {i['er_source']})" + (f", air gap {i['air_gap_mm']:g} mm"
                                                            if i["air_gap_mm"] else "")),
        ("finger", f"{i['finger_diameter_mm']:g} mm contact, body {i['body_pf']:g} pF"),
        ("method", f"{i['method_detail']} (touch {sign})"),
        ("finger adds", f"{e.finger_pf.nominal:.3f} pF  ({e.finger_pf.low:.3f} .. {e.finger_pf.high:.3f})"),
        ("idle reading", f"{e.idle_counts:.0f} counts, {e.counts_per_pf:.1f} counts per pF"),
        ("count change", f"{e.delta_counts.nominal:+.1f}  ({e.delta_counts.low:+.1f} .. "
                         f"{e.delta_counts.high:+.1f})"),
        ("noise", f"{e.noise_counts_pp:.1f} counts pp, {e.noise_counts_rms:.2f} rms (white {i['noise_pf']:g} "
                  f"pF rms, hum {i['hum_pf']:g} pF, after conversion {i['noise_counts']:g} counts)"),
        ("SNR (pp)", f"{e.snr_pp.nominal:.1f}  ({e.snr_pp.low:.1f} .. {e.snr_pp.high:.1f})"),
        ("SNR (rms)", f"{e.snr_rms.nominal:.1f}  ({e.snr_rms.low:.1f} .. {e.snr_rms.high:.1f})"),
        ("verdict", e.verdict),
        *[("note", n) for n in e.notes],
    ]


def run(args: argparse.Namespace) -> int:
    result = estimate(build_input(args))
    try:
        _print(result, as_json=args.json)
    except BrokenPipeError:
        # The reader went away (`| head`): the answer was not wanted further; leave without a traceback.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())  # so the interpreter's last flush cannot fail either
        os.close(devnull)
    return 0


def _print(result: Estimate, as_json: bool) -> None:
    if as_json:
        print(json.dumps(result.as_dict(), indent=2), flush=True)
        return
    rows = _lines(result)
    if sys.stdout.isatty() and not os.environ.get("NO_COLOR"):
        from rich.console import Console
        from rich.table import Table

        table = Table(show_header=False, box=None, padding=(0, 2))
        table.add_column(style="bold")
        table.add_column()
        for k, v in rows:
            table.add_row(k, v)
        Console().print(table)
    else:
        width = max(len(k) for k, _ in rows)
        print("\n".join(f"{k:<{width}}  {v}" for k, v in rows), flush=True)
