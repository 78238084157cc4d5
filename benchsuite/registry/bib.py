"""A small reader for ``sources.bib``: entry keys, types, fields and raw text.

Only what benchsuite needs: every case cites a key, reports list the entries
they cite, and ``table --bib`` writes them back out verbatim.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from benchsuite.errors import InputError

_ENTRY_START = re.compile(r"@(\w+)\s*\{\s*([^,\s]+)\s*,", re.MULTILINE)
_FIELD = re.compile(r"(\w+)\s*=\s*[{\"](.*?)[}\"]\s*,?\s*$", re.MULTILINE)


@dataclass(frozen=True)
class BibEntry:
    key: str
    kind: str
    fields: dict
    raw: str
    path: Path

    def short(self) -> str:
        """'Author (year)' for inline citations."""
        author = self.fields.get("author", self.key).split(" and ")[0].split(",")[0].strip("{} ")
        return f"{author} ({self.fields.get('year', 'n.d.')})"


def read_bib(path: Path) -> dict[str, BibEntry]:
    """Entries by key.  A key defined twice in one file is an input error."""
    if not Path(path).is_file():
        raise InputError("not a regular file", path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"byte {exc.start}: not valid UTF-8; sources.bib must be UTF-8", path) from None
    except OSError as exc:
        raise InputError(f"cannot read file: {exc.strerror}", path) from None
    starts = list(_ENTRY_START.finditer(text))
    entries: dict[str, BibEntry] = {}
    for n, m in enumerate(starts):
        end = starts[n + 1].start() if n + 1 < len(starts) else len(text)
        raw = text[m.start():end].strip()
        key = m.group(2)
        if key in entries:
            line = text.count("\n", 0, m.start()) + 1
            raise InputError(f"bib key {key!r} defined twice (line {line})", path, key)
        fields = {f.lower(): v.strip() for f, v in _FIELD.findall(raw)}
        entries[key] = BibEntry(key=key, kind=m.group(1).lower(), fields=fields, raw=raw, path=Path(path))
    return entries
