"""What the placement search may change: the `--vary` ranges and the settings they give.

A *variation* names one quantity and the range it may take: the placement's translation
x, y, z (m) and roll, pitch, yaw (deg) of the scenario frame in the cell, the fixed rail
position `rail_at` (m) or the follow bandwidth `bandwidth` (Hz) of a rail. A point of the
search is one value per variation, in these user units, in the order given; every quantity
not named keeps its starting value (the `--place` and rail options).

For a rig, the placement is that of the scenario frame in the rig frame: it moves every body
(and so every robot's motion) together, as `--place` does for `check RIG`. A rail quantity
names its robot, `carrier.rail_at` or `carrier.bandwidth`, since each robot has its own rail.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from reachgate.checking.pipeline import CheckSettings, Placement
from reachgate.checking.rail import RailPolicy
from reachgate.checking.rig_check import RailChoice, rig_rails
from reachgate.errors import ReachgateError
from reachgate.model.rig import Rig
from reachgate.model.robot import Robot

#: Every quantity the search can vary, with its unit in the --vary text.
UNITS = {
    "x": "m",
    "y": "m",
    "z": "m",
    "roll": "deg",
    "pitch": "deg",
    "yaw": "deg",
    "rail_at": "m",
    "bandwidth": "Hz",
}
TRANSLATION = ("x", "y", "z")
ROTATION = ("roll", "pitch", "yaw")
#: The quantities of a rail: plain for a robot file, `robot.name` for a robot of a rig.
RAIL_QUANTITIES = ("rail_at", "bandwidth")
#: A found value is rounded to this before it is verified and printed (so that what is
#: printed is exactly what was checked): 1 mm, 0.01 deg, 1 mHz.
PRINT_DECIMALS = {"m": 3, "deg": 2, "Hz": 3}


@dataclass(frozen=True)
class Variation:
    """One varied quantity: its name (a key of UNITS) and range [low, high] in its unit."""

    name: str
    low: float
    high: float

    @property
    def quantity(self) -> str:
        """The quantity without its robot: "rail_at" for "carrier.rail_at"."""
        return self.name.rpartition(".")[2]

    @property
    def robot(self) -> str | None:
        """The rig robot whose rail this is ("carrier" for "carrier.rail_at"), else None."""
        return self.name.rpartition(".")[0] or None

    @property
    def unit(self) -> str:
        return UNITS[self.quantity]

    @property
    def label(self) -> str:
        return f"{self.name} ({self.unit})"


def parse_vary(text: str) -> tuple[Variation, ...]:
    """From "x=-1:1,y=-2:2,yaw=-45:45" (m, deg, Hz); a rig's rail quantities name their robot
    ("carrier.rail_at=0:9"). Raises ReachgateError naming the fault."""
    found: dict[str, Variation] = {}
    for item in (part.strip() for part in text.split(",")):
        name, sep, span = item.partition("=")
        name = name.strip()
        robot, dot, quantity = name.rpartition(".")
        known = quantity in RAIL_QUANTITIES and robot.strip() if dot else name in UNITS
        if not sep or not known:
            raise ReachgateError(
                f"--vary: {item!r}: expected NAME=LOW:HIGH with NAME one of {', '.join(UNITS)} "
                "(a rig's rail: ROBOT.rail_at, ROBOT.bandwidth)"
            )
        if name in found:
            raise ReachgateError(f"--vary: {name} is named twice")
        low_text, colon, high_text = span.partition(":")
        try:
            low, high = float(low_text), float(high_text)
        except ValueError:
            low = high = math.nan
        if not colon or not (math.isfinite(low) and math.isfinite(high)):
            raise ReachgateError(f"--vary: {name}={span}: expected two numbers LOW:HIGH")
        if not low < high:
            raise ReachgateError(f"--vary: {name}={span}: LOW must be below HIGH")
        found[name] = Variation(name, low, high)
    return tuple(found.values())


def check_variations(
    model: Robot | Rig,
    base: CheckSettings,
    vary: tuple[Variation, ...],
    rails: Mapping[str, RailChoice] | None = None,
) -> None:
    """Refuse variations the robot (or rig) or the rail policy cannot take (ReachgateError).

    A robot's rail policy is the settings'; a rig's robots' are `rails` (robot name -> the
    policy it is checked with, every robot with a rail; default: the rig file's, rig_rails).
    """
    if not vary:
        raise ReachgateError("--vary: name at least one quantity to vary")
    if isinstance(model, Rig) and rails is None:
        rails = rig_rails(model)
    for v in vary:
        if v.quantity not in RAIL_QUANTITIES:
            continue
        if isinstance(model, Rig):
            if v.robot is None:
                names = ", ".join(f"{r.name}.{v.name}" for r in model.robots if r.robot.rail)
                raise ReachgateError(
                    f"--vary {v.name}: a rig's rail quantity names its robot"
                    + (f" ({names})" if names else "; no robot of this rig has a rail")
                )
            robot = model.robot(v.robot).robot
            choice = rails[v.robot] if robot.rail is not None else RailChoice()
            policy, option = choice.policy, "--rail, or the robot's rail in the rig file"
        else:
            if v.robot is not None:
                raise ReachgateError(
                    f"--vary {v.name}: {model.name!r} is a robot file; its rail is {v.quantity}"
                )
            robot, policy, option = model, base.rail, "--rail"
        if robot.rail is None:
            raise ReachgateError(f"--vary {v.name}: robot {robot.name!r} has no rail")
        if v.quantity == "rail_at":
            if policy is not RailPolicy.FIXED:
                raise ReachgateError(
                    f"--vary {v.name}: needs a fixed rail ({option}; follow moves the rail)"
                )
            if v.low < robot.rail.lower or v.high > robot.rail.upper:
                raise ReachgateError(
                    f"--vary {v.name}={v.low:g}:{v.high:g}: outside the rail range "
                    f"[{robot.rail.lower:g}, {robot.rail.upper:g}] m"
                )
        else:
            if policy is not RailPolicy.FOLLOW:
                raise ReachgateError(f"--vary {v.name}: needs a following rail ({option})")
            if v.low <= 0:
                raise ReachgateError(f"--vary {v.name}={v.low:g}:{v.high:g}: must be above 0 Hz")


def starting_values(
    model: Robot | Rig,
    base: CheckSettings,
    vary: tuple[Variation, ...],
    rails: Mapping[str, RailChoice] | None = None,
) -> np.ndarray:
    """The starting values of the varied quantities, (n_vary,) in user units: the settings'
    (a rig's rails: `rails`, as for check_variations)."""
    if isinstance(model, Rig):
        values = {
            **dict(zip(TRANSLATION, base.placement.xyz_m, strict=True)),
            **dict(zip(ROTATION, np.degrees(base.placement.rpy_rad), strict=True)),
        }
        for name, choice in (rails or {}).items():
            rail = model.robot(name).robot.rail
            values[f"{name}.rail_at"] = rail.home if choice.at_m is None else choice.at_m
            values[f"{name}.bandwidth"] = choice.bandwidth_hz
        return np.array([float(values[v.name]) for v in vary])
    robot = model
    values = {
        **dict(zip(TRANSLATION, base.placement.xyz_m, strict=True)),
        **dict(zip(ROTATION, np.degrees(base.placement.rpy_rad), strict=True)),
        "bandwidth": base.rail_bandwidth_hz,
        "rail_at": (
            base.rail_at_m if base.rail_at_m is not None or robot.rail is None else robot.rail.home
        ),
    }
    return np.array([float(values[v.name]) for v in vary])


def rounded(vary: tuple[Variation, ...], values: np.ndarray) -> np.ndarray:
    """Values rounded to their printed precision (PRINT_DECIMALS), kept inside their ranges."""
    out = [
        min(max(round(float(x), PRINT_DECIMALS[v.unit]), v.low), v.high)
        for v, x in zip(vary, values, strict=True)
    ]
    return np.array(out)


def settings_at(base: CheckSettings, vary: tuple[Variation, ...], values) -> CheckSettings:
    """The starting settings with the varied quantities set to `values` (user units)."""
    xyz = list(base.placement.xyz_m)
    rpy = list(base.placement.rpy_rad)
    changes: dict = {}
    for v, x in zip(vary, values, strict=True):
        x = float(x)
        if v.robot is not None:
            continue  # a rig robot's rail: rails_at
        if v.name in TRANSLATION:
            xyz[TRANSLATION.index(v.name)] = x
        elif v.name in ROTATION:
            rpy[ROTATION.index(v.name)] = math.radians(x)
        elif v.name == "rail_at":
            changes["rail_at_m"] = x
        else:
            changes["rail_bandwidth_hz"] = x
    return replace(base, placement=Placement(tuple(xyz), tuple(rpy)), **changes)


def rails_at(
    rails: Mapping[str, RailChoice], vary: tuple[Variation, ...], values
) -> tuple[tuple[str, RailChoice], ...]:
    """A rig's rails (robot name -> policy) with its robots' varied rail quantities set to
    `values`, as (name, RailChoice) pairs."""
    changed = dict(rails)
    for v, x in zip(vary, values, strict=True):
        if v.robot is not None:
            field_name = "at_m" if v.quantity == "rail_at" else "bandwidth_hz"
            changed[v.robot] = replace(changed[v.robot], **{field_name: float(x)})
    return tuple(changed.items())


def short_number(value: float, decimals: int) -> str:
    """`value` with at most `decimals` decimals, trailing zeros dropped, never "-0"."""
    text = f"{value:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return "0" if text == "-0" else text


def place_argument(placement: Placement) -> str:
    """A ready --place value: "x,y,z,roll,pitch,yaw" in m and deg, at printed precision."""
    xyz = [short_number(v, PRINT_DECIMALS["m"]) for v in placement.xyz_m]
    rpy = [short_number(math.degrees(v), PRINT_DECIMALS["deg"]) for v in placement.rpy_rad]
    return ",".join(xyz + rpy)
