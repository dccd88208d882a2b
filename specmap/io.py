"""Atomic writers for result files (the only place results touch the disk).

Writes go to a temporary file in the target folder, are flushed and fsynced,
then renamed over the target, so an interrupted run never leaves a torn file.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

import numpy as np

from specmap.errors import ResultsError


def to_plain(obj: Any) -> Any:
    """Convert numpy scalars/arrays and tuples to plain JSON types; inf/nan -> strings.

    JSON has no infinity: ``inf`` is written as the string ``"inf"`` (``"-inf"``,
    ``"nan"``), and ``float()`` reads it back.
    """
    if isinstance(obj, dict):
        return {str(k): to_plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_plain(obj.tolist())
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        if math.isfinite(x):
            return x
        return "nan" if math.isnan(x) else ("inf" if x > 0 else "-inf")
    if isinstance(obj, Path):
        return str(obj)
    return obj


def _current_umask() -> int:
    """The process umask, read without changing it where the system allows (Linux /proc)."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


@contextmanager
def _atomic_file(path: Path, mode: str = "wb") -> Iterator[IO[Any]]:
    """An open temporary file beside ``path``; renamed onto it (fsynced) only if the block succeeds."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, mode, encoding=None if "b" in mode else "utf-8") as fh:
            # mkstemp creates 0600; give the result the mode an ordinary open() would (umask honoured)
            os.fchmod(fh.fileno(), 0o666 & ~_current_umask())
            yield fh
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def _atomic_write_bytes(path: Path, data: bytes) -> None:
    with _atomic_file(path) as fh:
        fh.write(data)


def write_json(path: str | Path, obj: Any) -> Path:
    """Write JSON atomically (indent 2, plain floats, inf as "inf")."""
    p = Path(path)
    _atomic_write_bytes(p, (json.dumps(to_plain(obj), indent=2) + "\n").encode())
    return p


def _indented(text: str, pad: str) -> str:
    return text.replace("\n", "\n" + pad)


def write_json_streamed(
    path: str | Path,
    head: dict[str, Any],
    key: str,
    items: Iterable[Any],
    plain: bool = False,
    compact: bool = False,
) -> Path:
    """Write ``{**head, key: list(items)}`` atomically, one item at a time.

    The bytes are those :func:`write_json` would write for the whole object (indent 2, with
    ``key`` at its place in ``head``'s order), but the list is never held as one string: each
    item is serialised and written as it comes, so output larger than memory is fine.

    Parameters
    ----------
    head : dict
        The other keys; ``head[key]`` (any value, e.g. None) marks where the list goes.
    key : str
    items : iterable
        JSON-serialisable items (e.g. GeoJSON features), consumed once.
    plain : bool
        The items are plain JSON types already (no :func:`to_plain` copy); their lists may then
        be made lazily as the encoder walks them (e.g. one part of a large geometry at a time,
        :func:`specmap.special.atlas.iter_features_streamed`). Each item is written in the
        encoder's chunks, never as one string.
    compact : bool
        Each item on one line without spaces (``separators=(",", ":")``) instead of indented:
        the same JSON value in about a third of the bytes (the GeoJSON of a large map: one
        coordinate per line at indent 2). The encoder is still the pure-Python one, which walks
        lazy lists (``plain``).

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = write_json_streamed(d / "a.json", {"type": "T", "features": None, "n": 2}, "features",
    ...                         iter([{"id": 1}, {"id": 2}]))
    >>> _ = write_json(d / "b.json", {"type": "T", "features": [{"id": 1}, {"id": 2}], "n": 2})
    >>> (d / "a.json").read_bytes() == (d / "b.json").read_bytes()
    True
    """
    p = Path(path)
    if key not in head:
        raise ValueError(f"head has no key {key!r} to place the streamed list")
    with _atomic_file(p, "w") as fh:
        fh.write("{")
        for i, (k, v) in enumerate(head.items()):
            fh.write(("," if i else "") + "\n  " + json.dumps(k) + ": ")
            if k != key:
                fh.write(_indented(json.dumps(to_plain(v), indent=2), "  "))
                continue
            fh.write("[")
            n = 0
            # the separators and layout of json.dumps(indent=2), or one line per item; iterencode
            # without _one_shot never takes the C encoder, which would read lazy lists as empty
            encoder = json.JSONEncoder(separators=(",", ":")) if compact else json.JSONEncoder(indent=2)
            for item in items:
                fh.write(("," if n else "") + "\n    ")
                for chunk in encoder.iterencode(item if plain else to_plain(item)):
                    fh.write(chunk if compact else _indented(chunk, "    "))
                n += 1
            fh.write("\n  ]" if n else "]")
        fh.write("\n}\n" if head else "}\n")
    return p


def write_text(path: str | Path, text: str) -> Path:
    p = Path(path)
    _atomic_write_bytes(p, text.encode())
    return p


def read_json(path: str | Path) -> Any:
    return json.loads(Path(path).read_text())


def append_jsonl(path: str | Path, record: dict[str, Any]) -> None:
    """Append one JSON line, flushed and fsynced (a crash loses at most this line).

    The line is written with a single ``write`` call on an ``O_APPEND`` file, so
    concurrent appenders never interleave inside a line.
    """
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    line = (json.dumps(to_plain(record), separators=(",", ":")) + "\n").encode()
    fd = os.open(p, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o666)
    try:
        os.write(fd, line)
        os.fsync(fd)
    finally:
        os.close(fd)


def read_jsonl(path: str | Path) -> Iterator[dict[str, Any]]:
    """Yield complete JSON lines; a torn last line (no newline / bad JSON) is skipped."""
    p = Path(path)
    if not p.exists():
        return
    with p.open("rb") as fh:
        for raw in fh:
            if not raw.endswith(b"\n"):
                break
            try:
                yield json.loads(raw)
            except json.JSONDecodeError:
                continue


def check_out_dir(out: Path, option: str = "--out") -> None:
    """One-line :class:`ResultsError` if ``out`` cannot become a result folder (nothing is created)."""
    fix = f"give {option} a folder you can write (a new path or an existing folder)"
    if out.exists() and not out.is_dir():
        raise ResultsError("is an existing file, not a folder", file=str(out), field=option, fix=fix)
    # the nearest existing folder must be writable: out itself, or the ancestor it will be made in
    base = out
    while not base.exists():
        if base.parent == base:
            break
        base = base.parent
    if base.exists() and not base.is_dir():
        raise ResultsError(
            f"lies under {base}, which is a file, not a folder", file=str(out), field=option, fix=fix
        )
    if base.exists() and not os.access(base, os.W_OK | os.X_OK):
        where = "is a folder" if base == out else f"would be made in {base}, a folder"
        raise ResultsError(f"{where} you cannot write (read-only)", file=str(out), field=option, fix=fix)
