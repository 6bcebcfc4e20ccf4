"""An append-only journal of finished jobs (JSON lines), durable across a kill at any moment.

Every record is one line, written, flushed and fsync'ed before the next job is counted as done.
A process killed mid-write leaves at most one torn last line: reading ignores it and the next
append cuts it off first. Python floats survive JSON exactly (repr round-trips), so a resumed
campaign's rows are bit-identical to an uninterrupted run's.
"""

import json
import os
from pathlib import Path

from ..errors import ConfigError

try:
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None


def read_records(path):
    """Records of a journal and the byte length of its intact part.

    Returns
    -------
    records : list of dict, in file order
    valid_bytes : int, length of the prefix made of complete, parseable lines
    """
    path = Path(path)
    if not path.exists():
        return [], 0
    data = path.read_bytes()
    records, valid = [], 0
    for line in data.splitlines(keepends=True):
        if not line.endswith(b"\n"):
            break  # torn last line
        try:
            record = json.loads(line)
        except json.JSONDecodeError:
            break  # a torn line can only be the last one written
        if not isinstance(record, dict):
            break
        records.append(record)
        valid += len(line)
    return records, valid


class Journal:
    """Appends records to `path` durably; opening it drops a torn tail left by a killed run.

    The file is locked (POSIX advisory lock) while open: a second campaign writing to the same
    folder is refused with a ConfigError instead of interleaving lines.
    """

    def __init__(self, path):
        self.path = Path(path)
        self._handle = open(self.path, "ab")
        if fcntl is not None:
            try:
                fcntl.flock(self._handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                self._handle.close()
                raise ConfigError(f"{self.path}: another campaign is writing to this journal; "
                                  "wait for it or choose another --out") from None
        self.records, valid = read_records(self.path)
        if self._handle.tell() != valid:
            self._handle.truncate(valid)
            self._handle.seek(valid)
            self._sync()

    def append(self, record):
        """Write one record (a JSON-able dict) and make it durable before returning."""
        line = json.dumps(record, separators=(",", ":"), allow_nan=True) + "\n"
        self._handle.write(line.encode())
        self._sync()

    def _sync(self):
        self._handle.flush()
        os.fsync(self._handle.fileno())

    def close(self):
        if not self._handle.closed:
            self._handle.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
