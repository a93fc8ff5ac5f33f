"""Writing outputs safely: never over an existing file without force, never half-written."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from layout.errors import OutputExists, UsageError


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def refuse_existing(path: Path, force: bool) -> None:
    """Raise OutputExists when path exists and force is not given."""
    if path.exists() and not force:
        raise OutputExists(str(path))


def write_new(path: str | Path, data: bytes | str, force: bool = False) -> Path:
    """Write data to path through a temporary file renamed into place; returns path."""
    target = Path(path)
    refuse_existing(target, force)
    if isinstance(data, str):
        data = data.encode("utf-8")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    except OSError as exc:
        raise UsageError(f"{target}: cannot write here: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual permissions
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return target


def write_all(folder: str | Path, files: dict[str, bytes | str], force: bool = False) -> list[Path]:
    """Write several files into folder, all or none: every one is refused before any is written."""
    out = Path(folder)
    for name in files:
        refuse_existing(out / name, force)
    return [write_new(out / name, data, force) for name, data in files.items()]
