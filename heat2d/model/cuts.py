"""The reader of ``[[cut]]`` entries: named polylines through the body whose heat
crossing the run reports (docs/model-format.md, "Cut lines").

Here only what the text alone can tell is checked (keys, names, at least two points,
no repeated point); whether the line lies in the body and separates it into two sides
needs the geometry, and is checked when the heat crossing it is computed
(:mod:`heat2d.post.cuts`), naming the entry and its line the same way.
"""

from __future__ import annotations

from typing import Any

from .base import BaseReader, brief
from .schema import Cut


class CutReader(BaseReader):
    """Reads ``[[cut]]``: ``name`` and ``through = [[x, y], [x, y], ...]``."""

    def read_cuts(self, raw: list[dict[str, Any]]) -> list[Cut]:
        out: list[Cut] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw):
            name, entry, where = self.named_entry(spec, "cut", i, seen)
            line = self.index.find(*where)
            if "through" not in spec:
                raise self.fail(entry, "needs through = [[x, y], [x, y], ...] (a polyline "
                                "from outline to outline, or closed)", line)
            through = spec["through"]
            at = self.index.find(*where, "through") or line
            if not isinstance(through, list) or len(through) < 2:
                got = len(through) if isinstance(through, list) else brief(through)
                raise self.fail(entry, f"through: a cut needs at least 2 points [x, y], "
                                f"got {got}", at)
            points = [self.point(p, entry, f"through[{j}]", where)
                      for j, p in enumerate(through)]
            for j in range(1, len(points)):
                if points[j] == points[j - 1]:
                    raise self.fail(entry, f"through[{j}]: repeats the point before it, "
                                    f"[{points[j][0]:g}, {points[j][1]:g}]", at)
            if points[0] == points[-1] and len(points) < 4:
                raise self.fail(entry, "through: a closed cut (last point = first) needs "
                                "at least 3 different points", at)
            out.append(Cut(name, i, tuple(points), line))
        return out
