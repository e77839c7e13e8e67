"""Undo and redo for every change to the valuation: the model, the column roles, the
exclusions and the subject.

The history watches the :class:`~appraise.gui.session.Session` rather than the views:
whenever the session's editable state changes, whichever view changed it, one command
holding the state before and after is pushed on a :class:`QUndoStack`. Undoing puts the
earlier state back through the session's own setters, so the views follow as they do for
any other change. Keystrokes in one field within :data:`MERGE_SECONDS` of each other
merge into one step. Opening another sales file or a workfile starts a new history.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any

from PySide6.QtCore import QObject
from PySide6.QtGui import QAction, QKeySequence, QUndoCommand, QUndoStack
from PySide6.QtWidgets import QWidget
from shiboken6 import isValid

from appraise.engine.modelspec import ModelSpec
from appraise.engine.roles import RoleMap
from appraise.engine.sales import Exclusion

from .session import Session, is_workfile

MERGE_SECONDS = 1.5
"""Edits of the same field closer together than this are one step of the history."""
_MERGE_ID = 14


@dataclass(frozen=True, eq=True)
class EditableState:
    """What the user can change and undo: model, subject, roles, own exclusions."""

    spec: ModelSpec | None
    subject: dict[str, Any] = field(default_factory=dict)
    roles: dict[str, str] = field(default_factory=dict)
    exclusions: tuple[Exclusion, ...] = ()

    @classmethod
    def of(cls, session: Session) -> EditableState:
        sales = session.sales
        roles = dict(sales.roles.columns) if sales is not None else {}
        return cls(session.spec, session.subject, roles, session.user_exclusions)


def describe(before: EditableState, after: EditableState) -> tuple[str, str | None]:
    """A short label of the change (for the Edit menu) and a merge key (None: never merged).

    Typing in one feature row, one derived variable or one subject field gives a merge
    key, so a word typed letter by letter is undone at once.
    """
    if before.exclusions != after.exclusions:
        old = {e.row for e in before.exclusions}
        new = {e.row for e in after.exclusions}
        if new - old:
            rows = sorted(new - old)
            return f"exclude the sale at row {rows[0]}" + ("…" if len(rows) > 1 else ""), None
        if old - new:
            rows = sorted(old - new)
            return f"use the sale at row {rows[0]} again" + ("…" if len(rows) > 1 else ""), None
        return "change an exclusion's reason", None
    if before.roles != after.roles:
        changed = [
            r for r in {**before.roles, **after.roles} if before.roles.get(r) != after.roles.get(r)
        ]
        return (
            f"change the column role{'s' if len(changed) > 1 else ''} ({', '.join(changed)})",
            None,
        )
    if before.spec != after.spec:
        return _describe_model(before.spec, after.spec)
    if before.subject != after.subject:
        keys = [
            k
            for k in {**before.subject, **after.subject}
            if before.subject.get(k) != after.subject.get(k)
        ]
        if len(keys) == 1:
            return f"change the subject's {keys[0].replace('_', ' ')}", f"subject:{keys[0]}"
        return "change the subject", None
    return "change", None


def _describe_model(a: ModelSpec | None, b: ModelSpec | None) -> tuple[str, str | None]:
    if a is None or b is None:
        return "set the model", None
    fa, fb = list(a.features), list(b.features)
    if len(fb) == len(fa) + 1 and all(f in fb for f in fa):
        added = next(f for f in fb if f not in fa)
        return f"add feature {added}", None
    if len(fa) == len(fb) + 1 and all(f in fa for f in fb):
        removed = next(f for f in fa if f not in fb)
        return f"remove feature {removed}", None
    if len(fa) == len(fb) and fa != fb:
        at = [i for i in range(len(fa)) if fa[i] != fb[i]]
        if len(at) == 1:
            return "edit a feature", f"feature:{at[0]}"
        return "reorder the features", None
    if dict(a.derived) != dict(b.derived):
        if len(a.derived) == len(b.derived):
            return "edit a derived variable", "derived"
        return "change the derived variables", None
    for attr, text in (
        ("target", "the price column"),
        ("response", "the response"),
        ("level", "the interval level"),
        ("cov_type", "the standard errors"),
        ("title", "the model's title"),
        ("exclude", "the model file's exclusions"),
        ("effective_date", "the effective date"),
    ):
        if getattr(a, attr, None) != getattr(b, attr, None):
            return f"change {text}", f"model:{attr}" if attr in ("level", "title") else None
    return "change the model", None


class StateCommand(QUndoCommand):
    """One step: the state before and after, put back through :class:`SessionHistory`."""

    def __init__(
        self, history: SessionHistory, before: EditableState, after: EditableState
    ) -> None:
        label, key = describe(before, after)
        super().__init__(label)
        self.history = history
        self.before = before
        self.after = after
        self.key = key
        self.stamp = time.monotonic()
        self._done = True  # pushed after the change was made: the first redo does nothing

    def id(self) -> int:  # noqa: A003 (Qt's name)
        return _MERGE_ID if self.key is not None else -1

    def mergeWith(self, other: QUndoCommand) -> bool:  # noqa: N802 (Qt's name)
        if not isinstance(other, StateCommand) or other.key != self.key:
            return False
        if other.stamp - self.stamp > MERGE_SECONDS:
            return False
        self.after = other.after
        self.stamp = other.stamp
        return True

    def undo(self) -> None:
        self._done = False
        self.history.apply(self.before)

    def redo(self) -> None:
        if self._done:
            return
        self._done = True
        self.history.apply(self.after)


class SessionHistory(QObject):
    """The undo stack of one session; see the module docstring."""

    def __init__(self, session: Session, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.session = session
        self.stack = QUndoStack(self)
        self._baseline = EditableState.of(session)
        self._path = session.sales_path
        self._expect: EditableState | None = None
        self._adopting = False
        # bound methods, not lambdas: Qt drops the connections when this object goes
        for sig in (session.modelChanged, session.subjectChanged, session.salesChanged):
            sig.connect(self._observe_any)
        session.exclusionsChanged.connect(self._observe)
        session.loadFinished.connect(self._load_finished)
        session.loadFailed.connect(self._load_ended)
        session.loadCancelled.connect(self._load_ended)

    # --- recording -----------------------------------------------------------------
    def _observe_any(self, _payload: object = None) -> None:
        self._observe()

    def _load_ended(self, _message: str = "") -> None:
        self._settle(force=True)

    def _observe(self) -> None:
        s = self.session
        if s.sales_path != self._path or self._adopting:
            # another file: a new valuation, a new history, which starts once the whole
            # of it (model, subject, roles) has arrived
            self.reset()
            self._adopting = True
            return
        now = EditableState.of(s)
        if self._expect is not None:
            if now == self._expect:
                self._expect = None
                self._baseline = now
            return  # part-way through putting a state back
        if now == self._baseline:
            return
        before, self._baseline = self._baseline, now
        self.stack.push(StateCommand(self, before, now))

    def _load_finished(self, label: str) -> None:
        if is_workfile(label) or self._adopting:
            self.reset()  # a workfile replaces everything: its state is the new start
        else:
            self._settle(force=True)

    def _settle(self, *, force: bool = False) -> None:
        """After putting a state back: take what the session holds as the new baseline
        unless a re-read (a roles change) is still on its way."""
        if self._expect is None:
            return
        if force or not self.session.is_loading:
            self._expect = None
            self._baseline = EditableState.of(self.session)

    def reset(self) -> None:
        """Forget the history; the session's current state is the starting point."""
        self.stack.clear()
        self._expect = None
        self._adopting = False
        self._path = self.session.sales_path
        self._baseline = EditableState.of(self.session)

    # --- putting a state back ---------------------------------------------------------
    def apply(self, state: EditableState) -> None:
        """Put ``state`` back through the session's setters (the views follow)."""
        s = self.session
        self._expect = state
        s.set_user_exclusions(state.exclusions)
        if state.spec is not None:
            s.set_model(state.spec)
        s.set_subject(state.subject)
        if s.sales is not None and dict(s.sales.roles.columns) != state.roles:
            s.set_roles(RoleMap(state.roles))  # read again on a worker; settles on arrival
        if EditableState.of(s) == state:
            self._expect = None
            self._baseline = state
        else:
            self._settle()

    # --- the Edit menu's commands -------------------------------------------------------
    def make_actions(self, parent: QWidget) -> tuple[QAction, QAction]:
        """Undo (Ctrl+Z) and Redo (Ctrl+Shift+Z, and the platform's own redo key), whose
        text names the step they would take back or make again."""
        undo = QAction("&Undo", parent)
        undo.setShortcuts(_with(QKeySequence.StandardKey.Undo, "Ctrl+Z"))
        undo.setStatusTip("Take back the last change to the model, roles, exclusions or subject")
        redo = QAction("&Redo", parent)
        redo.setShortcuts(_with(QKeySequence.StandardKey.Redo, "Ctrl+Shift+Z"))
        redo.setStatusTip("Make the change taken back again")
        undo.triggered.connect(self.stack.undo)
        redo.triggered.connect(self.stack.redo)

        def refresh() -> None:
            if not (isValid(self.stack) and isValid(undo) and isValid(redo)):
                return  # the window is being taken down: its stack clears itself on the way
            undo.setEnabled(self.stack.canUndo())
            redo.setEnabled(self.stack.canRedo())
            u, r = self.stack.undoText(), self.stack.redoText()
            undo.setText(f"&Undo {u}" if u else "&Undo")
            redo.setText(f"&Redo {r}" if r else "&Redo")

        self.stack.indexChanged.connect(lambda _i: refresh())
        self.stack.cleanChanged.connect(lambda _c: refresh())
        refresh()
        parent.addAction(undo)
        parent.addAction(redo)
        return undo, redo


def _with(standard: QKeySequence.StandardKey, extra: str) -> list[QKeySequence]:
    keys = list(QKeySequence.keyBindings(standard))
    wanted = QKeySequence(extra)
    if all(k != wanted for k in keys):
        keys.insert(0, wanted)
    return keys
