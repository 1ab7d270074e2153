"""Line numbers for messages: tomllib keeps no positions, so :class:`LineIndex` finds
the line of a table header, or of a key inside a table, in the model text itself.
"""

from __future__ import annotations

import re


class LineIndex:
    """Finds the line of a table header or of a key inside it (tomllib keeps no positions)."""

    _HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?")

    def __init__(self, text: str) -> None:
        self.lines = text.splitlines()
        self.blocks: list[tuple[str, int, int, int]] = []  # (table, ordinal, start, end)
        counts: dict[str, int] = {}
        starts: list[tuple[str, int, int]] = []
        for i, raw in enumerate(self.lines):
            m = self._HEADER.match(raw)
            if m:
                name = m.group(2).replace('"', "").replace(" ", "")
                ordinal = counts.get(name, 0)
                counts[name] = ordinal + 1
                starts.append((name, ordinal, i))
        for j, (name, ordinal, start) in enumerate(starts):
            end = starts[j + 1][2] if j + 1 < len(starts) else len(self.lines)
            self.blocks.append((name, ordinal, start, end))
        first = starts[0][2] if starts else len(self.lines)
        self.blocks.append(("", 0, -1, first))
        # One look-up per message, not a scan of every block (models with thousands of
        # shapes ask for thousands of lines).
        self._where: dict[tuple[str, int], tuple[int, int]] = {}
        for name, o, start, end in self.blocks:
            self._where.setdefault((name, o), (start, end))

    def find(self, table: str, ordinal: int = 0, key: str | None = None) -> int | None:
        where = self._where.get((table, ordinal))
        if where is None:
            return None
        start, end = where
        if key is None:
            return start + 1 if start >= 0 else None
        pat = re.compile(rf"^\s*\"?{re.escape(key)}\"?\s*=")
        for i in range(max(start, 0), end):
            if pat.match(self.lines[i]):
                return i + 1
        return start + 1 if start >= 0 else None
