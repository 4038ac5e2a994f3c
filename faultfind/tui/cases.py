"""The bundled field cases, as the opening screen lists them.

A field case is a folder holding ``circuit.toml`` and ``README.md`` (and
``readings.csv``, ``fault.toml``: see field_cases/README.md).  The list
shows the circuit's title and the README's first paragraph.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass
from pathlib import Path

__all__ = ["FieldCase", "find_cases", "cases_folder", "first_paragraph"]


@dataclass(frozen=True)
class FieldCase:
    """One bundled field case.

    Attributes
    ----------
    name : str
        The folder's name, e.g. ``booster_pump_panel``.
    circuit : pathlib.Path
        Its ``circuit.toml``.
    title : str
        The circuit's ``title`` (the folder name when it has none).
    description : str
        The README's first paragraph of prose (headings and a lone
        italic note such as *Invented scenario.* are skipped), one line.
    """

    name: str
    circuit: Path
    title: str
    description: str


def first_paragraph(text: str) -> str:
    """The first paragraph of prose of a Markdown text, joined into one line.

    Headings (``#``), and paragraphs that are a single emphasised line
    (``*Invented scenario.*``), are skipped; ``""`` when there is none.
    """
    if not isinstance(text, str):
        raise TypeError(f"text: expected str, got {type(text).__name__}")
    paragraphs, current = [], []
    for line in text.splitlines():
        if line.strip():
            current.append(line.strip())
        elif current:
            paragraphs.append(current)
            current = []
    if current:
        paragraphs.append(current)
    for para in paragraphs:
        if para[0].startswith("#"):
            para = para[1:]
            if not para:
                continue
        joined = " ".join(para)
        if len(para) == 1 and joined[:1] in "*_" and joined[-1:] in "*_":
            continue
        return joined
    return ""


def cases_folder(start=None) -> Path | None:
    """Where the bundled field cases are: ``field_cases`` in ``start`` (default
    the working folder), else beside the installed package; None if neither."""
    here = Path.cwd() if start is None else Path(start)
    for folder in (here / "field_cases", Path(__file__).resolve().parents[2] / "field_cases"):
        if folder.is_dir():
            return folder
    return None


def find_cases(folder=None) -> list[FieldCase]:
    """Every field case in ``folder`` (default :func:`cases_folder`), by name.

    A sub-folder without ``circuit.toml`` is not a case; a circuit whose
    title cannot be read is listed under its folder's name (the circuit file
    is checked properly when a session starts).
    """
    if folder is None:
        folder = cases_folder()
        if folder is None:
            return []
    if not isinstance(folder, (str, os.PathLike)):
        raise TypeError(f"folder: expected a folder name, got {type(folder).__name__}")
    folder = Path(folder)
    out = []
    if not folder.is_dir():
        return out
    for sub in sorted(p for p in folder.iterdir() if p.is_dir()):
        circuit = sub / "circuit.toml"
        if not circuit.is_file():
            continue
        title = sub.name
        try:
            with open(circuit, "rb") as f:
                found = tomllib.load(f).get("title")
            if isinstance(found, str) and found.strip():
                title = found.strip()
        except (OSError, tomllib.TOMLDecodeError):
            pass
        description = ""
        readme = sub / "README.md"
        try:
            description = first_paragraph(readme.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError):
            pass
        out.append(FieldCase(sub.name, circuit, title, description))
    return out
