"""Reading ``sources.bib``: entry keys, types, fields and raw text, parsed with ``bibtexparser`` (v2).

Only what benchsuite needs: every case cites a key, reports list the entries
they cite, and ``table --bib`` writes them back out verbatim (``raw``).
Conventions: entry types and field names lower-case; field values as written
between the outer braces or quotes (inner braces kept, line breaks inside a
value kept), numbers as their text.  A file that is not a regular file, not
UTF-8, has an entry the parser cannot read, or defines a key twice is an
:class:`InputError` naming the file, the entry and its line (exit code 2).
"""

from __future__ import annotations

import logging
import re
from dataclasses import dataclass
from pathlib import Path

import bibtexparser
from bibtexparser.model import DuplicateBlockKeyBlock, ParsingFailedBlock

from benchsuite.errors import InputError

# the parser also logs each failed block; ours becomes an InputError with the same facts
logging.getLogger("bibtexparser").setLevel(logging.ERROR)

_KEY = re.compile(r"[^\s,{}()\"#%'=]+")
_ENTRY_HEAD = re.compile(r"@\s*(\w+)\s*[{(]\s*([^,\s]*)")


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


def _read(path: Path) -> str:
    if not Path(path).is_file():                 # a FIFO or a directory: never block on a read
        raise InputError("not a regular file", path)
    try:
        return Path(path).read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"byte {exc.start}: not valid UTF-8; sources.bib must be UTF-8", path) from None
    except OSError as exc:
        raise InputError(f"cannot read file: {exc.strerror}", path) from None


def _failure(block, path: Path) -> InputError:
    """The InputError for a block the parser could not turn into an entry."""
    line = (block.start_line or 0) + 1
    head = _ENTRY_HEAD.match(block.raw.lstrip())
    key = head.group(2) if head and head.group(2) else None
    if isinstance(block, DuplicateBlockKeyBlock):
        return InputError(f"bib key {block.key!r} defined twice (line {line})", path, block.key)
    error = getattr(block, "error", None)
    reason = str(getattr(error, "abort_reason", "") or error or "").strip()
    detail = f": {reason}" if reason else ""
    what = f"entry {key!r}" if key else "entry"
    return InputError(f"{what} (line {line}) is not valid BibTeX{detail}", path, key)


def read_bib(path: Path) -> dict[str, BibEntry]:
    """Entries by key.  A key defined twice in one file, or an unreadable entry, is an input error."""
    library = bibtexparser.parse_string(_read(path))
    failed = sorted(library.failed_blocks, key=lambda b: b.start_line or 0)
    if failed:
        raise _failure(failed[0], path)
    entries: dict[str, BibEntry] = {}
    for entry in library.entries:
        if not entry.key:
            raise InputError(f"entry (line {entry.start_line + 1}) has no key", path)
        if not _KEY.fullmatch(entry.key):
            raise InputError(f"entry {entry.key!r} (line {entry.start_line + 1}): not a valid BibTeX key "
                             "(no spaces, commas, braces, quotes, # or %)", path, entry.key)
        fields = {f.key.lower(): str(f.value).strip() for f in entry.fields}
        entries[entry.key] = BibEntry(key=entry.key, kind=entry.entry_type.lower(), fields=fields,
                                      raw=entry.raw.strip(), path=Path(path))
    return entries
