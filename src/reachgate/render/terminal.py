"""The width text tables are laid out to: the terminal's, or COLUMNS, else 80 columns."""

from __future__ import annotations

import os
import shutil

#: Width when neither COLUMNS nor a terminal says (a pipe, a file): the classic terminal.
DEFAULT_WIDTH = 80
#: Narrower than this, tables of nine columns cannot show their numbers; wider is hard to read.
MIN_WIDTH, MAX_WIDTH = 60, 200


def table_width() -> int:
    """COLUMNS if set to a number, else the terminal's width, else DEFAULT_WIDTH; clamped to
    [MIN_WIDTH, MAX_WIDTH]."""
    text = os.environ.get("COLUMNS", "")
    if text.strip().isdigit():
        width = int(text)
    else:
        width = shutil.get_terminal_size((DEFAULT_WIDTH, 24)).columns
    return max(MIN_WIDTH, min(MAX_WIDTH, width))


def plain_table():
    """A rich Table in the house style: columns one space apart, the header underlined with
    '-', ASCII only, no frame, so that nine narrow columns fit 80 columns. Text too long for
    its column wraps at spaces, and a word longer than the column folds (nothing is cut)."""
    from rich.box import Box
    from rich.table import Table

    class _PlainTable(Table):
        def add_column(self, *args, **kwargs):
            kwargs.setdefault("overflow", "fold")
            super().add_column(*args, **kwargs)

    # Box lines: top, head, head row, mid, row, foot row, foot, bottom; each is left edge,
    # fill, divider, right edge. The edges are hidden (show_edge=False).
    box = Box("    \n    \n -  \n    \n    \n -  \n    \n    \n", ascii=True)
    return _PlainTable(box=box, show_edge=False, pad_edge=False, padding=(0, 0))


def wrap_text(text: str, width: int, first: str = "", rest: str | None = None) -> str:
    """text filled to width at spaces only (no word or hyphenated name cut); first prefixes
    the first line, rest (default: spaces as wide as first) the others."""
    import textwrap

    return textwrap.fill(
        text,
        width=width,
        initial_indent=first,
        subsequent_indent=" " * len(first) if rest is None else rest,
        break_long_words=False,
        break_on_hyphens=False,
    )


def wrap_items(items: list[str], width: int, separator: str = "; ") -> str:
    """Items joined by separator, lines broken only between items (an item wider than the
    line is itself wrapped at spaces), so that no phrase is cut in two."""
    mark, gap = separator.rstrip(), separator[len(separator.rstrip()) :]
    pieces = [item + mark for item in items[:-1]] + list(items[-1:])
    lines: list[str] = []
    for piece in pieces:
        if lines and len(lines[-1]) + len(gap) + len(piece) <= width:
            lines[-1] += gap + piece
        else:
            lines.append(piece)
    return "\n".join(wrap_text(line, width) if len(line) > width else line for line in lines)


def breakable_axis(axis: str) -> str:
    """A table cell for an axis: a clearance pair "a/b" as "a / b", so that a narrow column
    breaks the pair between its two shapes instead of inside a shape's name."""
    return axis.replace("/", " / ")


def fixed(value: float, digits: int = 2) -> str:
    """value with a fixed number of decimals, never '-0.00' (a negative zero or a value that
    rounds to zero prints as 0.00)."""
    text = f"{value:.{digits}f}"
    return text[1:] if text.startswith("-") and float(text) == 0.0 else text


def tidy(text: str) -> str:
    """Rendered text without the spaces rich pads the last column with at line ends."""
    return "".join(line.rstrip() + "\n" for line in text.splitlines())
