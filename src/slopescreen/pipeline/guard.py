"""Checks a run makes before it computes: the output folder, the inputs in it, the memory.

Everything here runs in ``slopescreen check`` too, so a run that ``check``
passes does not fail later for any of these reasons.

docs/outputs.md, "What a run guarantees".
"""

from __future__ import annotations

import os
from pathlib import Path

from ..errors import InputError

__all__ = ["SYSTEM_FOLDERS", "SYSTEM_TREES", "check_output", "folder_problem", "writable_names",
           "memory_needed_bytes", "check_memory"]

SYSTEM_FOLDERS = ("/", "/bin", "/boot", "/dev", "/etc", "/home", "/lib", "/lib32", "/lib64",
                  "/libx32", "/media", "/mnt", "/opt", "/proc", "/root", "/run", "/sbin", "/srv",
                  "/sys", "/tmp", "/usr", "/var")
"""Folders an output may never be (a subfolder of most of them is fine)."""

SYSTEM_TREES = ("/bin", "/boot", "/dev", "/etc", "/lib", "/lib32", "/lib64", "/libx32", "/proc",
                "/run", "/sbin", "/sys", "/usr")
"""Folders an output may not even lie inside."""


def writable_names(scenario) -> set[str]:
    """Every file name a run of ``scenario`` could write into its output folder.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> names = writable_names(SimpleNamespace(rain=(SimpleNamespace(slug="wet"),)))
    >>> {"manifest.json", "report.html", "factor_of_safety_wet.tif",
    ...  "map_factor_of_safety_wet.png", "corridor_segments.csv"} <= names
    True
    """
    from ..products import PRODUCTS, STYLES
    from .commit import JOURNAL, LOCK, MANIFEST

    slugs = [None] + [r.slug for r in scenario.rain]
    names = {MANIFEST, LOCK, JOURNAL, JOURNAL + ".tmp", "report.html"}
    for p in PRODUCTS:
        if p.kind == "png":
            continue
        for kind in (p.kind,) + tuple(p.extra_kinds):
            for slug in (slugs if p.per_rain else [None]):
                names.add(p.file_name(slug, kind=kind))
    for key in STYLES:
        for slug in slugs:
            names.add(f"map_{key}" + (f"_{slug}" if slug else "") + ".png")
    return names


def _system_refusal(out: Path) -> str | None:
    text = str(out)
    home = str(Path.home().resolve()) if Path.home().exists() else None
    if text in SYSTEM_FOLDERS or text == home:
        return f"{text} is a system or home folder"
    for tree in SYSTEM_TREES:
        if text.startswith(tree + "/"):
            return f"{text} lies inside the system folder {tree}"
    return None


def folder_problem(out: Path, where: str) -> None:
    """Refuse an output folder that is a system or home folder, lies in a file or is not writable.

    ``where`` starts the message (``"s.toml: output"``).
    """
    out = Path(out).resolve()
    why = _system_refusal(out)
    if why:
        raise InputError(f"{where}: {why}; write into a folder of its own")
    probe = out
    while not probe.exists():
        probe = probe.parent
    if not probe.is_dir():
        raise InputError(f"{where}: {probe.name} is a file, not a folder; the output "
                         f"folder {out} cannot be made inside it")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError(f"{where}: cannot write into {probe} (no permission); choose "
                         "another output folder")


def check_output(scenario) -> None:
    """Refuse an output folder the run cannot or must not write, before anything is computed.

    Raises
    ------
    InputError
        The output is a system or home folder, lies inside a file, cannot be
        written, or holds an input file with a name the run could write.
    """
    from .commit import STAGING_PREFIX

    name = scenario.path.name
    out = Path(scenario.output).resolve()
    folder_problem(out, f"{name}: output")
    names = writable_names(scenario)
    for p in scenario.input_files():
        p = Path(p).resolve()
        if p.parent == out and (p.name in names or p.name.startswith(STAGING_PREFIX)):
            raise InputError(f"{p.name}: output: the output folder {out.name} holds this input "
                             "file and the run writes a file of that name; move the input or "
                             "choose another output folder")


# ---------------------------------------------------------------------------------------------
# memory
# ---------------------------------------------------------------------------------------------

BYTES_PER_CELL = {"base": 50.0, "runout": 50.0, "clusters": 40.0, "inventory": 8.0}
"""Peak bytes per DEM cell of a whole run (docs/performance.md: 47 B/cell for a plain run,
95 B/cell with runout and a corridor), rounded up, and what each optional stage adds."""

BASE_BYTES = 400e6
"""The interpreter, the libraries and the compiled kernels (about 400 MB)."""


def memory_needed_bytes(scenario, cells: int) -> float:
    """Estimated peak memory of a run of ``scenario`` on ``cells`` DEM cells, bytes.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> s = SimpleNamespace(runout=None, corridor=None, clusters=None, inventory=None)
    >>> round(memory_needed_bytes(s, 16_000_000) / 1e9, 2)
    1.2
    """
    per = BYTES_PER_CELL["base"]
    if scenario.runout is not None or scenario.corridor is not None:
        per += BYTES_PER_CELL["runout"]
    if scenario.clusters is not None:
        per += BYTES_PER_CELL["clusters"]
    if scenario.inventory is not None:
        per += BYTES_PER_CELL["inventory"]
    return BASE_BYTES + per * cells


def _available_bytes() -> float | None:
    """Memory available to a new process (``MemAvailable`` of /proc/meminfo), or None."""
    try:
        with open("/proc/meminfo", encoding="ascii") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024.0
    except OSError:
        return None
    return None


def check_memory(scenario, shape, *, available=None) -> None:
    """Refuse a run that would not fit in the memory available, before reading the DEM.

    Raises
    ------
    InputError
        The estimate exceeds the available memory; the message says how much is
        needed and how to need less.
    """
    avail = _available_bytes() if available is None else available
    if avail is None:
        return
    cells = int(shape[0]) * int(shape[1])
    need = memory_needed_bytes(scenario, cells)
    if need > avail:
        raise InputError(
            f"{Path(scenario.dem).name}: dem: a run on {shape[0]:,} x {shape[1]:,} cells needs "
            f"about {need / 1e9:,.1f} GB of memory but {avail / 1e9:,.1f} GB are available; clip "
            "the DEM to the area of interest, resample it to coarser cells, or leave out "
            "[clusters], [runout] and [corridor]")
