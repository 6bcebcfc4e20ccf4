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


@contextlib.contextmanager
def staged_directory(out_dir):
    """Yield a temporary directory beside `out_dir`; on success move its files into `out_dir`.

    On any exception the temporary directory is removed and `out_dir` is left as it was.
    """
    out_dir = Path(out_dir)
    out_dir.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out_dir.name}.", dir=out_dir.parent))
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    out_dir.mkdir(parents=True, exist_ok=True)
    for item in tmp.iterdir():
        target = out_dir / item.name
        if target.is_dir() and not target.is_symlink():
            shutil.rmtree(target)
        os.replace(item, target)
    shutil.rmtree(tmp, ignore_errors=True)


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
    their total.
    """

    def __init__(self):
        self.seconds = {}

    @contextlib.contextmanager
    def stage(self, name: str):
        """Time the enclosed block as stage `name` (seconds, wall clock)."""
        start = time.perf_counter()
        try:
            yield
        finally:
            self.seconds[name] = self.seconds.get(name, 0.0) + time.perf_counter() - start

    def as_dict(self) -> dict:
        """{stage: seconds} rounded to milliseconds, with "total" (the sum of the stages)."""
        out = {name: round(seconds, 3) for name, seconds in self.seconds.items()}
        out["total"] = round(sum(self.seconds.values()), 3)
        return out
