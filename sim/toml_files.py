"""Read TOML files with one-line errors (size limit, UTF-8, syntax with the line number); comment
blocks for the TOML files skidpad writes."""

from __future__ import annotations

import os
import textwrap
import tomllib
from collections.abc import Sequence
from pathlib import Path

from planners.errors import ScenarioError

#: refuse files larger than this before reading them
MAX_FILE_BYTES = 1 << 20


def read_toml(path: str | os.PathLike) -> dict:
    """Read a TOML file, refusing huge, non-UTF-8 and malformed files with one-line errors."""
    where = str(path)
    try:
        size = os.path.getsize(path)
    except OSError as exc:
        raise ScenarioError(f"{where}: cannot read file ({exc.strerror or exc})") from None
    if size > MAX_FILE_BYTES:
        raise ScenarioError(
            f"{where}: file is {size / 2**20:.1f} MiB; scenario and field files must be under "
            f"{MAX_FILE_BYTES / 2**20:g} MiB"
        )
    try:
        data = Path(path).read_bytes()
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ScenarioError(f"{where}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
    except OSError as exc:
        raise ScenarioError(f"{where}: cannot read file ({exc.strerror or exc})") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(f"{where}: TOML syntax error: {exc}") from None


def comment_block(lines: Sequence[str], *, width: int = 95) -> str:
    """Each of ``lines`` wrapped to ``width`` columns as ``# `` comment lines; "" for no lines."""
    return "".join(
        textwrap.fill(line, width=width, initial_indent="# ", subsequent_indent="# ",
                      break_on_hyphens=False, break_long_words=False) + "\n"
        for line in lines
    )
