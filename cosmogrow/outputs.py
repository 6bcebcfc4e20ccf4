"""Writing results: staged so that a failed run leaves nothing half-written, JSON that numpy can feed."""

import contextlib
import hashlib
import json
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from .errors import ConfigError


STAGE_TAG = ".stage-"


def stage_prefix(out_dir):
    """Name prefix of the staging folders of `out_dir` (hidden siblings: ``.NAME.stage-XXXX``)."""
    return f".{Path(out_dir).name}{STAGE_TAG}"


def stale_stages(out_dir):
    """Staging folders of `out_dir` left by runs that were killed (newest first)."""
    out_dir = Path(out_dir)
    found = [p for p in out_dir.parent.glob(stage_prefix(out_dir) + "*") if p.is_dir()]
    return sorted(found, key=lambda p: p.stat().st_mtime, reverse=True)


def check_out_dir(out_dir, marker, *, force=False, resume=False):
    """Refuse, before any work, an output folder that cannot take a command's results.

    The folder must be new or empty, or hold the results of the same command (recognised by its
    `marker` file); those are replaced with `force` or continued with `resume`. A file, a folder
    holding anything else, or a place where no folder can be made is refused.

    Returns
    -------
    bool : True when the folder holds earlier results of the same command.

    Raises
    ------
    ConfigError
        One line naming the folder and what to do.
    """
    out_dir = Path(out_dir)
    if out_dir.exists() and not out_dir.is_dir():
        raise ConfigError(f"--out {out_dir}: is a file; expected a folder (new, empty, or holding "
                          f"results of this command)")
    if out_dir.is_dir() and any(out_dir.iterdir()):
        if not (out_dir / marker).exists():
            raise ConfigError(f"--out {out_dir}: holds other files (no {marker}); expected a new or "
                              f"empty folder, or one holding results of this command")
        if not (force or resume):
            raise ConfigError(f"--out {out_dir}: holds results of an earlier run; give --force to "
                              f"replace them, or choose another folder")
        return True
    ancestor = out_dir.parent
    while not ancestor.exists() and ancestor != ancestor.parent:
        ancestor = ancestor.parent
    try:
        if not ancestor.is_dir():
            raise NotADirectoryError(f"{ancestor} is a file")
        os.rmdir(tempfile.mkdtemp(prefix=stage_prefix(out_dir), dir=ancestor))  # a write test only
    except OSError as exc:
        raise ConfigError(f"--out {out_dir}: cannot write there ({exc.strerror or exc})") from None
    return False


@contextlib.contextmanager
def staged_directory(out_dir, *, keep=()):
    """Yield a staging folder beside `out_dir`; on success it replaces `out_dir` whole.

    The results appear at once (one rename): an earlier `out_dir` is moved aside, the staging
    folder renamed to `out_dir`, and the old one removed. Files named in `keep` (a campaign's
    journal) are copied from the old folder first. On any exception, including an interrupt,
    the staging folder is removed and `out_dir` is left as it was.
    """
    out_dir = Path(out_dir)
    made = _make_parents(out_dir.parent)
    try:
        tmp = Path(tempfile.mkdtemp(prefix=stage_prefix(out_dir), dir=out_dir.parent))
    except BaseException:
        _remove_empty(made)
        raise
    try:
        yield tmp
        for name in keep:
            if (out_dir / name).is_file() and not (tmp / name).exists():
                shutil.copy2(out_dir / name, tmp / name)
        _swap(tmp, out_dir)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        _remove_empty(made)
        raise


def _make_parents(folder):
    """Create `folder` and its missing parents; returns those created, deepest first."""
    missing = []
    while not folder.exists() and folder != folder.parent:
        missing.append(folder)
        folder = folder.parent
    for path in reversed(missing):
        path.mkdir(exist_ok=True)
    return missing


def _remove_empty(folders):
    for path in folders:  # deepest first
        with contextlib.suppress(OSError):
            path.rmdir()


def _swap(stage, out_dir):
    """Rename `stage` to `out_dir`, replacing an existing folder (moved aside, then removed)."""
    umask = os.umask(0)
    os.umask(umask)
    stage.chmod(0o777 & ~umask)  # mkdtemp makes private folders; results get the usual permissions
    old = None
    if out_dir.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.old-", dir=out_dir.parent))
        os.replace(out_dir, old / out_dir.name)
    try:
        os.replace(stage, out_dir)
    except BaseException:
        if old is not None:
            os.replace(old / out_dir.name, out_dir)
        raise
    finally:
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)


def to_jsonable(obj):
    """Convert numpy scalars/arrays, tuples and Paths so json can write them; NaN becomes None."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if np.isfinite(value) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def write_json(path, data):
    """Write `data` as indented JSON (keys in insertion order)."""
    Path(path).write_text(json.dumps(to_jsonable(data), indent=2) + "\n")


def sha256_file(path):
    """Hex SHA-256 of a file's bytes."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def package_versions():
    """Versions of cosmogrow and the libraries a result depends on."""
    from importlib import metadata

    names = ("cosmogrow", "numpy", "scipy", "astropy", "pandas", "emcee", "h5py")
    versions = {}
    for name in names:
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = None
    return versions


class StageTimes:
    """Wall-clock seconds spent in the named stages of a command (summary.json `timings`).

    A stage entered twice accumulates. `as_dict` lists the stages in the order first entered and
    their total. Work done by another process while these stages ran is recorded with `beside`
    (its own seconds; the stage that collected it counts only the wait) and listed under "beside".
    """

    def __init__(self):
        self.seconds = {}
        self.beside_seconds = {}

    def beside(self, name: str, seconds: float) -> None:
        """Record `seconds` of work named `name` done beside the stages, in another process."""
        self.beside_seconds[name] = self.beside_seconds.get(name, 0.0) + float(seconds)

    @contextlib.contextmanager
    def stage(self, name: str):
        """Time the enclosed block as stage `name` (seconds, wall clock)."""
        start = time.perf_counter()
        try:
            yield
        finally:
            self.seconds[name] = self.seconds.get(name, 0.0) + time.perf_counter() - start

    def as_dict(self) -> dict:
        """{stage: seconds} rounded to milliseconds, with "total" (the sum of the stages) and, when
        any, "beside": {work: seconds} done in parallel (not in the total)."""
        out = {name: round(seconds, 3) for name, seconds in self.seconds.items()}
        out["total"] = round(sum(self.seconds.values()), 3)
        if self.beside_seconds:
            out["beside"] = {name: round(seconds, 3) for name, seconds in self.beside_seconds.items()}
        return out
