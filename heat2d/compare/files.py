"""Writing a comparison: ``compare.json``, ``compare.txt`` and ``compare.png``, all or
nothing."""

from __future__ import annotations

import json
from pathlib import Path

from ..post.writers import write_folder
from .plot import plot_compare
from .sides import Side
from .text import format_comparison

FILES = ("compare.json", "compare.txt", "compare.png")
"""The files of a comparison folder."""


def write_comparison(a: Side, b: Side, doc: dict, out_dir: str | Path) -> list[Path]:
    """Write the comparison of ``a`` and ``b`` into ``out_dir``, all or nothing.

    Parameters
    ----------
    a, b
        The two sides (:func:`~heat2d.compare.load_side`).
    doc
        Their comparison (:func:`~heat2d.compare.compare_sides`).
    out_dir
        The folder; it is swapped in whole (see :func:`heat2d.post.writers.write_folder`),
        and refused if it holds files other than these three.

    Returns
    -------
    list of Path
        The files written.
    """
    def fill(folder: Path) -> list[str]:
        (folder / "compare.json").write_text(json.dumps(doc, indent=2, allow_nan=False)
                                             + "\n", encoding="utf-8")
        (folder / "compare.txt").write_text(format_comparison(doc) + "\n", encoding="utf-8")
        plot_compare(a, b, folder / "compare.png",
                     same=doc["same_geometry"] and doc.get("same_moment", True))
        return list(FILES)

    return write_folder(out_dir, fill, is_output=lambda name: name in FILES)
