"""Text on screen exactly as given: the interface's Static for words that can hold user text
(serials, machine units, sites, names, notes, reasons, file paths, messages quoting them)."""

from __future__ import annotations

from textual.widgets import Static


def plain(content):
    """A str as ``Plain`` shows it: each line made visible by ``fmt.visible`` (control
    characters as escapes); other content (rich Text, Content, tables) as it is.
    Printable text is returned at once, without importing the formatting module (the
    fleet view's first frame shows the database's file name before anything is read)."""
    if not isinstance(content, str) or content.isprintable():
        return content
    from logbook.fmt import visible

    return "\n".join(visible(line) for line in content.split("\n"))


class Plain(Static):
    """A Static that never reads markup: ``[/]``, ``x[/b]`` or ``[link=...]`` in a note or
    a name is shown as typed, and an ESC or CR in it as ``\\x1b`` or ``\\r``."""

    def __init__(self, content="", **kwargs) -> None:
        kwargs["markup"] = False
        super().__init__(plain(content), **kwargs)

    def update(self, content="", *, layout: bool = True) -> None:
        super().update(plain(content), layout=layout)
