"""The output folder of a run: owned under a lock, committed as a whole, never touching inputs.

A run writes its products into a hidden staging folder inside the output
folder. When every stage has succeeded, :func:`commit` writes a small
journal (``.slopescreen-commit.json``, made atomic by :func:`os.replace`)
that lists what moves into place and which products of the earlier run go,
and then carries it out: the products move into place, the earlier run's
products that this run does not write are removed (only files that the
earlier manifest lists with a SHA-256 that the file still has: a file the
tool did not write, or that a user has changed since, is never deleted), the
manifest moves last and the journal is deleted.

A run killed before the journal exists leaves the earlier run as it was (and
a staging folder that the next run removes). A run killed after it leaves a
journal that the next run into the folder completes before doing anything
else (:func:`recover`), so the folder then holds the new run whole. Every run
holds an exclusive :func:`fcntl.flock` on ``.slopescreen.lock`` for its whole
time: a second run into the same folder fails at once, and a killed run
holds no lock.

docs/outputs.md, "What a run guarantees".
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import logging
import os
import shutil
import signal
import threading
from contextlib import contextmanager
from pathlib import Path

from ..errors import InputError

__all__ = ["LOCK", "JOURNAL", "STAGING_PREFIX", "output_lock", "recover", "commit",
           "file_sha256", "folder_problems"]

log = logging.getLogger("slopescreen.pipeline")

LOCK = ".slopescreen.lock"
"""The lock file of an output folder (held with ``flock`` during a run; never deleted)."""

JOURNAL = ".slopescreen-commit.json"
"""The commit journal: present only between the start and the end of a commit."""

STAGING_PREFIX = ".slopescreen-partial-"
"""Name prefix of the staging folders of runs."""

MANIFEST = "manifest.json"


def file_sha256(path) -> str:
    """SHA-256 of a file's bytes (hex)."""
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


@contextmanager
def output_lock(out: Path, where: str):
    """Hold the output folder's lock; fail at once when another run holds it.

    Parameters
    ----------
    out : Path
        The output folder (exists).
    where : str
        The scenario file's name, for the message.

    Raises
    ------
    InputError
        Another run holds the lock.
    """
    fd = os.open(out / LOCK, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise InputError(f"{where}: output: another slopescreen run is writing into "
                             f"{out.name}; wait for it to end or choose another output "
                             "folder") from None
        yield
    finally:
        os.close(fd)                         # closing the descriptor releases the lock


def _write_journal(out: Path, journal: dict) -> None:
    tmp = out / (JOURNAL + ".tmp")
    with open(tmp, "w", encoding="utf-8") as f:
        json.dump(journal, f)
        f.flush()
        os.fsync(f.fileno())
    os.replace(tmp, out / JOURNAL)


def _roll_forward(out: Path, journal: dict, protected) -> None:
    staging = out / journal["staging"]
    for name in journal["move"]:
        target = out / name
        if target.resolve() in protected:
            raise InputError(f"{name}: an unfinished commit in {out.name} would overwrite an "
                             "input file; move the input out of the output folder")
        source = staging / name
        if source.exists():
            os.replace(source, target)
    for item in journal["remove"]:
        target = out / item["path"]
        if (target.is_file() and target.resolve() not in protected
                and file_sha256(target) == item["sha256"]):
            target.unlink()
    manifest = staging / MANIFEST
    if manifest.exists():
        os.replace(manifest, out / MANIFEST)
    shutil.rmtree(staging, ignore_errors=True)
    (out / JOURNAL).unlink()


def recover(out: Path, *, protected=frozenset()) -> bool:
    """Finish a commit that a killed run left, and remove stale staging folders.

    Call with the folder's lock held (:func:`output_lock`), before anything
    else is done in the folder.

    Returns
    -------
    bool
        True when an unfinished commit was completed.
    """
    done = False
    journal = out / JOURNAL
    if journal.is_file():
        try:
            record = json.loads(journal.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            record = None
        if record is not None:
            _roll_forward(out, record, protected)
            log.warning("%s: completed the commit of a run that was stopped while committing",
                        out.name)
            done = True
        else:                                 # unreadable: its run never began its moves
            journal.unlink()
    (out / (JOURNAL + ".tmp")).unlink(missing_ok=True)
    for stale in out.glob(STAGING_PREFIX + "*"):
        if stale.is_dir() and not any(p.is_relative_to(stale.resolve()) for p in protected):
            shutil.rmtree(stale, ignore_errors=True)
    return done


def _previous_products(out: Path) -> dict:
    """``path -> sha256`` of the earlier run's products ({} when unknown)."""
    path = out / MANIFEST
    if not path.is_file():
        return {}
    try:
        old = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    hashes = old.get("product_sha256") if isinstance(old, dict) else None
    listed = [p.get("path") for p in old.get("products", [])] if isinstance(old, dict) else []
    if not isinstance(hashes, dict):
        if listed:
            log.warning("%s: the earlier run's manifest records no checksums, so its %d "
                        "products are left in place where this run does not replace them",
                        out.name, len(listed))
        return {}
    return {p: h for p, h in hashes.items() if isinstance(p, str) and isinstance(h, str)
            and "/" not in p and p not in (MANIFEST, LOCK, JOURNAL)}


@contextmanager
def _signals_deferred():
    """Hold Ctrl-C and SIGTERM back while the commit runs (they are acted on right after).

    The Python handlers of both signals (which run in the main thread, whichever
    thread the signal reached) are replaced by one that only notes the signal;
    once the commit is complete the original handler is called for each noted
    signal, and an interrupt it raises carries ``committed = True``, so the
    command can say that the run was written after all.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    noted = []
    held = (signal.SIGINT, signal.SIGTERM)
    original = {sig: signal.getsignal(sig) for sig in held}
    for sig in held:
        signal.signal(sig, lambda signum, frame: noted.append(signum))
    try:
        yield
    finally:
        for sig, handler in original.items():
            signal.signal(sig, signal.SIG_DFL if handler is None else handler)
        for sig in dict.fromkeys(noted):
            handler = original[sig]
            if callable(handler):
                try:
                    handler(sig, None)
                except KeyboardInterrupt as exc:      # it arrived during the commit
                    exc.committed = True
                    raise
            elif handler in (signal.SIG_DFL, None):
                os.kill(os.getpid(), sig)             # its default action, now


def commit(staging: Path, out: Path, products, manifest: dict, *,
           protected=frozenset()) -> dict:
    """Move a run's staged products into place as a whole, the manifest last.

    Parameters
    ----------
    staging : Path
        The staging folder inside ``out`` that holds every product.
    out : Path
        The output folder (its lock held).
    products : sequence of Product
        What the run wrote (``path`` relative to ``staging``).
    manifest : dict
        The run's manifest; ``product_sha256`` (path -> SHA-256) is added.
    protected : set of Path
        Resolved input files: never overwritten, never removed.

    Returns
    -------
    dict
        The manifest as written.

    Raises
    ------
    InputError
        A product would overwrite an input file (nothing is moved).
    KeyboardInterrupt
        Ctrl-C or SIGTERM arrived while committing: raised once the commit is
        complete, with ``committed = True``.
    """
    names = [p.path for p in products]
    for name in names + [MANIFEST]:
        target = out / name
        if target.exists() and target.resolve() in protected:
            raise InputError(f"{name}: a product would overwrite an input file; choose another "
                             "output folder")
    manifest = dict(manifest) | {"product_sha256": {n: file_sha256(staging / n) for n in names}}
    (staging / MANIFEST).write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
    keep = set(names) | {MANIFEST}
    remove = [{"path": p, "sha256": h} for p, h in _previous_products(out).items()
              if p not in keep]
    journal = {"staging": staging.name, "move": names, "remove": remove}
    with _signals_deferred():
        _write_journal(out, journal)
        _roll_forward(out, journal, protected)
    return manifest


def folder_problems(out: Path, *, ignore=()) -> list[str]:
    """How the output folder differs from its manifest (empty when it equals it).

    Every product the manifest lists exists with its recorded SHA-256, and
    no other file lies in the folder apart from the manifest, the lock and
    the names in ``ignore`` (input files kept there). For tests and for users
    who want to verify a folder.
    """
    manifest = json.loads((out / MANIFEST).read_text(encoding="utf-8"))
    hashes = manifest.get("product_sha256", {})
    problems = []
    listed = {p["path"] for p in manifest["products"]}
    for name in sorted(listed):
        path = out / name
        if not path.is_file():
            problems.append(f"{name}: listed but missing")
        elif hashes.get(name) != file_sha256(path):
            problems.append(f"{name}: checksum differs from the manifest")
    for path in sorted(out.iterdir()):
        if path.name in listed or path.name in (MANIFEST, LOCK) or path.name in ignore:
            continue
        problems.append(f"{path.name}: not listed in the manifest")
    return problems
