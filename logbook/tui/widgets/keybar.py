"""The key bar at the foot of every screen: the screen's keys that fit its width.

A stock Footer cuts the last keys off in the middle of a word when they do not fit
("d Remov" at 80 columns). The key bar leaves out whole keys instead, the ones a screen
names in ``KEY_BAR_DROPS`` (least used first), only as many as the width needs; F1 lists
every key of the screen, shown or not. Needs Textual only (it is in the fleet view's first frame).
"""

from __future__ import annotations

from rich.cells import cell_len
from textual.app import ComposeResult
from textual.widgets import Footer
from textual.widgets._footer import FooterKey

#: Left out first on every screen: switching the theme is seldom done (F1 lists it).
APP_DROPS = ("app.theme",)


def fit_keys(items: list[tuple[str, str, str]], width: int, drops: tuple[str, ...]) -> list[tuple[str, str, str]]:
    """``items`` (binding id, key as shown, description) that fit ``width`` cells, in
    order: the ids in ``drops`` are left out one after another, in that order, until the
    rest fit (each key reads "key description" with one space after it)."""
    def needed(shown) -> int:
        return sum(cell_len(key) + 1 + cell_len(words) for _, key, words in shown) + len(shown) - 1

    shown = list(items)
    for binding_id in drops:
        if needed(shown) <= width:
            break
        shown = [item for item in shown if item[0] != binding_id]
    return shown


class KeyBar(Footer):
    """A compact Footer that leaves out whole keys (``KEY_BAR_DROPS`` of the screen) when narrow."""

    def __init__(self, **kwargs) -> None:
        kwargs.setdefault("compact", True)
        super().__init__(**kwargs)
        self._width = 0  # the width the keys were chosen for

    def shown_bindings(self) -> list:
        """(binding, enabled, tooltip) of the keys on the bar, one per action, in the screen's order."""
        by_action: dict[str, tuple] = {}
        for _, binding, enabled, tooltip in self.screen.active_bindings.values():
            if binding.show and binding.action not in by_action:
                by_action[binding.action] = (binding, enabled, tooltip)
        chosen = list(by_action.values())
        items = [(b.id or b.action, self.app.get_key_display(b), b.description) for b, _, _ in chosen]
        drops = APP_DROPS + tuple(getattr(self.screen, "KEY_BAR_DROPS", ()))
        width = self._width = self.size.width or self.app.size.width
        kept = {item[0] for item in fit_keys(items, width, drops)}
        return [entry for entry, item in zip(chosen, items) if item[0] in kept]

    def compose(self) -> ComposeResult:
        if not self._bindings_ready:
            return
        shown = self.shown_bindings()
        self.styles.grid_size_columns = len(shown)
        for binding, enabled, tooltip in shown:
            yield FooterKey(binding.key, self.app.get_key_display(binding), binding.description, binding.action,
                            disabled=not enabled, tooltip=tooltip).data_bind(compact=Footer.compact)

    def on_resize(self) -> None:
        if self._bindings_ready and self.size.width != self._width:
            self.call_after_refresh(self.recompose)
