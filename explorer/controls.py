"""Widgets bound to the state: every edit goes through ``BenchState.propose``.

A bound widget sends its value to the state, which accepts it only if the
library finds it valid for the open recording; otherwise the library's
message appears on the message line of the widget's settings group and the
state (and so every plot) keeps the last good settings. The widget follows
the state back when the state changes for another reason (a session load,
a new channel).
"""

from __future__ import annotations

import html

import panel as pn

__all__ = ["MessageLine", "Binder"]


class MessageLine:
    """The message shown beside one group of settings (hidden while there is none)."""

    def __init__(self, group: str):
        self.group = group
        self.pane = pn.pane.HTML("", visible=False, css_classes=["st-message"], sizing_mode="stretch_width",
                                 name=f"message-{group}")
        self.text = ""

    def show(self, text: str | None) -> None:
        text = text or ""
        if text == self.text:
            return
        self.text = text
        self.pane.object = f'<div class="st-error" data-group="{self.group}">{html.escape(text)}</div>' if text else ""
        self.pane.visible = bool(text)


class Binder:
    """Two-way links between widgets and state parameters, with per-group message lines."""

    def __init__(self, state):
        self.state = state
        self.messages: dict[str, MessageLine] = {}
        self.widgets: dict[str, pn.widgets.Widget] = {}
        self._syncing = False

    def message(self, group: str) -> MessageLine:
        """The message line of ``group`` (made on first use)."""
        if group not in self.messages:
            self.messages[group] = MessageLine(group)
        return self.messages[group]

    def propose(self, group: str, **changes) -> str | None:
        """Send ``changes`` to the state; show the refusal, if any, on ``group``'s message line.

        The line is cleared first: the run an accepted change starts reports
        its own problems there (synchronously, before this returns, without a
        server; later, with one).
        """
        line = self.message(group)
        line.show(None)
        text = self.state.propose(**changes)
        if text:
            line.show(text)
        return text

    def bind(self, name: str, widget, group: str, *, throttled: bool = False, to_state=None, to_widget=None):
        """Link ``widget`` to state parameter ``name``; failures show on ``group``'s message line.

        ``throttled`` listens to ``value_throttled`` (a slider acts when released).
        ``to_state``/``to_widget`` convert values (e.g. empty text <-> None).
        """
        to_state = to_state or (lambda v: v)
        to_widget = to_widget or (lambda v: v)
        self.widgets[name] = widget

        def push(event):
            if self._syncing:
                return
            self.propose(group, **{name: to_state(event.new)})

        def pull(event):
            self._syncing = True
            try:
                widget.value = to_widget(event.new)
            finally:
                self._syncing = False

        widget.param.watch(push, "value_throttled" if throttled else "value")
        self.state.param.watch(pull, name)
        self._syncing = True
        try:
            widget.value = to_widget(getattr(self.state, name))
        finally:
            self._syncing = False
        return widget
