"""What a scan checks with, as it travels to workers and as a results store knows it.

A robot file travels as its raw bytes (the store keeps their sha256). A rig travels as the raw
bytes of the rig file and of every robot file it names (RigFiles), so that workers, local or
on a cluster, rebuild the very rig the scan validated without reading any file of their own;
the store keeps one fingerprint over all of them, so a change to any of those files checks
the cases again.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from pathlib import Path

from reachgate.checking.pipeline import CheckSettings
from reachgate.checking.rig_check import RailChoice, rig_settings_dict, robot_settings
from reachgate.errors import ReachgateError
from reachgate.model.rig import Rig, is_rig_data, load_rig, rig_from_dict
from reachgate.model.robot import parse_toml_bytes


@dataclass(frozen=True)
class RigFiles:
    """A rig as raw bytes: the rig file's and those of every robot file it names.

    path: the rig file as given (its label in messages; robot files resolve from its folder);
    raw: its bytes; robots: (robot file path as the rig resolves it, its bytes), in the rig's
    order; rails: the command line's rail choice for every robot with a rail, or None (each
    robot's choice from the rig file).
    """

    path: str
    raw: bytes
    robots: tuple[tuple[str, bytes], ...]
    rails: RailChoice | None = None

    def load(self) -> Rig:
        """The rig, built from these bytes only. Raises ReachgateError."""
        data = parse_toml_bytes(self.raw, self.path, "rig")
        return rig_from_dict(
            data, source=self.path, folder=Path(self.path).parent, robot_files=dict(self.robots)
        )

    @property
    def fingerprint(self) -> str:
        """sha256 over the rig file's sha256 and every robot file's, in the rig's order."""
        lines = ["reachgate rig", _sha256(self.raw), *(_sha256(raw) for _, raw in self.robots)]
        return _sha256("\n".join(lines).encode())


def _sha256(raw: bytes) -> str:
    return hashlib.sha256(raw).hexdigest()


def _read(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except OSError as error:
        raise ReachgateError(f"{path}: cannot read ({error.strerror or error})") from None


def read_model_files(
    path: str | Path, rails: RailChoice | None = None
) -> tuple[bytes | RigFiles, Rig]:
    """A robot or rig file for a scan -> (what travels to workers, the validated rig).

    A robot file (or a rig given as a robot file alone) travels as its bytes; a rig file as
    RigFiles, rebuilt here from the bytes read so that the parent checks what workers get.
    Raises ReachgateError naming the file.
    """
    path = Path(path)
    rig = load_rig(path)
    if rig.alone:
        return _read(path), rig
    files = RigFiles(
        str(path),
        _read(path),
        tuple((r.robot.source, _read(Path(r.robot.source))) for r in rig.robots),
        rails,
    )
    return files, files.load()


def fingerprint(source: bytes | RigFiles) -> str:
    """How a results store knows a robot (sha256 of its file) or a rig (RigFiles.fingerprint)."""
    return source.fingerprint if isinstance(source, RigFiles) else _sha256(source)


def file_fingerprint(path: str | Path) -> str:
    """fingerprint() of a robot or rig file as it is now. Raises ReachgateError."""
    path = Path(path)
    raw = _read(path)
    if is_rig_data(parse_toml_bytes(raw, str(path), "rig or robot")):
        return fingerprint(read_model_files(path)[0])
    return _sha256(raw)


def scan_settings(
    rig: Rig, settings: CheckSettings, rails: RailChoice | None, source: bytes | RigFiles
) -> dict:
    """The settings a store keeps with each case: CheckSettings.as_dict() for a robot alone;
    for a rig, each robot's resolved rail (rig_settings_dict), where it came from, and the
    sha256 of the rig file and of each robot's file (`files_sha256`: the fingerprint's parts)."""
    if rig.alone or not isinstance(source, RigFiles):
        return settings.as_dict()
    used = {
        p.name: (p.robot.name, p.robot.rail is not None, robot_settings(p, settings, rails))
        for p in rig.robots
    }
    out = rig_settings_dict(settings, used)
    out["rails_from"] = "rig file" if rails is None else "command line"
    out["files_sha256"] = {
        "rig": _sha256(source.raw),
        "robots": {
            p.name: _sha256(raw) for p, (_, raw) in zip(rig.robots, source.robots, strict=True)
        },
    }
    return out
