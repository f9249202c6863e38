"""Command palette entries for every key action (the same list the help screen shows)."""

from __future__ import annotations

from functools import partial

from textual.command import DiscoveryHit, Hit, Hits, Provider

from workbench.ui.keymap import KeyAction


class ActionCommands(Provider):
    """Offers each action as "<scope>: <description>"; choosing one runs it in its view."""

    def _actions(self) -> list[KeyAction]:
        return self.app.key_actions(with_navigation=False)  # type: ignore[attr-defined,no-any-return]

    def _run(self, action: KeyAction) -> None:
        self.app.run_key_action(action)  # type: ignore[attr-defined]

    async def discover(self) -> Hits:
        for action in self._actions():
            yield DiscoveryHit(f"{action.scope}: {action.description}", partial(self._run, action), help=f"key {action.key}")

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for action in self._actions():
            name = f"{action.scope}: {action.description}"
            score = matcher.match(name)
            if score > 0:
                yield Hit(score, matcher.highlight(name), partial(self._run, action), help=f"key {action.key}")
