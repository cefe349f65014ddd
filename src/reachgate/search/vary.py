"""What the placement search may change: the `--vary` ranges and the settings they give.

A *variation* names one quantity and the range it may take: the placement's translation
x, y, z (m) and roll, pitch, yaw (deg) of the scenario frame in the cell, the fixed rail
position `rail_at` (m) or the follow bandwidth `bandwidth` (Hz) of a rail. A point of the
search is one value per variation, in these user units, in the order given; every quantity
not named keeps its starting value (the `--place` and rail options).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from reachgate.checking.pipeline import CheckSettings, Placement
from reachgate.checking.rail import RailPolicy
from reachgate.errors import ReachgateError
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
    def unit(self) -> str:
        return UNITS[self.name]

    @property
    def label(self) -> str:
        return f"{self.name} ({self.unit})"


def parse_vary(text: str) -> tuple[Variation, ...]:
    """From "x=-1:1,y=-2:2,yaw=-45:45" (m, deg, Hz). Raises ReachgateError naming the fault."""
    found: dict[str, Variation] = {}
    for item in (part.strip() for part in text.split(",")):
        name, sep, span = item.partition("=")
        name = name.strip()
        if not sep or name not in UNITS:
            raise ReachgateError(
                f"--vary: {item!r}: expected NAME=LOW:HIGH with NAME one of {', '.join(UNITS)}"
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


def check_variations(robot: Robot, base: CheckSettings, vary: tuple[Variation, ...]) -> None:
    """Refuse variations the robot or the rail policy cannot take (ReachgateError)."""
    if not vary:
        raise ReachgateError("--vary: name at least one quantity to vary")
    names = {v.name for v in vary}
    for v in vary:
        if v.name in ("rail_at", "bandwidth") and robot.rail is None:
            raise ReachgateError(f"--vary {v.name}: robot {robot.name!r} has no rail")
    if "rail_at" in names:
        if base.rail is not RailPolicy.FIXED:
            raise ReachgateError("--vary rail_at: needs --rail fixed (follow moves the rail)")
        v = next(v for v in vary if v.name == "rail_at")
        if v.low < robot.rail.lower or v.high > robot.rail.upper:
            raise ReachgateError(
                f"--vary rail_at={v.low:g}:{v.high:g}: outside the rail range "
                f"[{robot.rail.lower:g}, {robot.rail.upper:g}] m"
            )
    if "bandwidth" in names:
        if base.rail is not RailPolicy.FOLLOW:
            raise ReachgateError("--vary bandwidth: needs --rail follow")
        v = next(v for v in vary if v.name == "bandwidth")
        if v.low <= 0:
            raise ReachgateError(f"--vary bandwidth={v.low:g}:{v.high:g}: must be above 0 Hz")


def starting_values(robot: Robot, base: CheckSettings, vary: tuple[Variation, ...]) -> np.ndarray:
    """The starting settings' values of the varied quantities, (n_vary,) in user units."""
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
        if v.name in TRANSLATION:
            xyz[TRANSLATION.index(v.name)] = x
        elif v.name in ROTATION:
            rpy[ROTATION.index(v.name)] = math.radians(x)
        elif v.name == "rail_at":
            changes["rail_at_m"] = x
        else:
            changes["rail_bandwidth_hz"] = x
    return replace(base, placement=Placement(tuple(xyz), tuple(rpy)), **changes)


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
