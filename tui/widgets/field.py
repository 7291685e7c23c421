"""One form row: a label, an input (or a choice or a tick box), and its message beside it."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.validation import Validator
from textual.widget import Widget
from textual.widgets import Checkbox, Input, Label, Select, Static

from tui.widgets.inorder import InOrderKeys

LIST_OPEN = "close the list first (Enter picks, Esc closes)"
NOW = object()  # check_value: the field as it is now
OPEN_LIST = object()  # a choice read while its list was open: not a value yet


class FieldInput(InOrderKeys, Input):
    """A text field whose editing keys (Backspace, Delete, arrows) are applied in the order
    they were typed, with the letters around them (tui/widgets/inorder.py)."""


class FieldSelect(InOrderKeys, Select):
    """A choice whose keys (Enter, space, the arrows that open its list) are taken in the
    order typed: a save key after them sees the list open."""


class TickBox(InOrderKeys, Checkbox):
    """A tick box whose mark is a character, not only a colour: ✓ ticked, blank not.
    With `words`, the label says it too ("yes" / "no")."""

    def __init__(self, label: str = "", *args, words: tuple[str, str] | None = None, **kw) -> None:  # noqa: ANN002, ANN003
        self.words = words
        value = bool(kw.get("value", False))
        super().__init__(words[0 if value else 1] if words else label, *args, **kw)

    @property
    def BUTTON_INNER(self) -> str:  # type: ignore[override]  # noqa: N802 - Textual's name
        return "✓" if self.value else " "

    def watch_value(self, value: bool) -> None:
        if self.words:
            self.label = self.words[0 if value else 1]
        self.refresh()


@dataclass
class Spec:
    """What a form field is; forms list these and the row builds itself from one."""

    name: str
    label: str
    value: str = ""
    validators: list[Validator] = field(default_factory=list)
    required: bool = False
    options: Sequence[tuple[str, str]] | None = None  # a choice instead of typing
    check: bool | None = None  # a tick box instead of typing
    placeholder: str = ""
    disabled: bool = False
    hint: str = ""  # shown in the message place while all is well


class FieldRow(Horizontal):
    DEFAULT_CSS = """
    FieldRow { height: auto; margin: 0 0 0 0; }
    FieldRow > Label { width: 15; padding: 0 1 0 0; text-align: right; }
    FieldRow > Input, FieldRow > Select { width: 26; }
    FieldRow > Checkbox { width: 26; }
    FieldRow > .field-msg { width: 1fr; height: auto; padding: 0 0 0 1; color: $text-muted; }
    FieldRow > .field-msg.-bad { color: $text-error; text-style: bold; }
    """

    def __init__(self, spec: Spec) -> None:
        super().__init__(id=f"row-{spec.name}")
        self.spec = spec
        self.shown = False  # a message was shown once: keep it live while typing

    def compose(self) -> ComposeResult:
        s = self.spec
        yield Label(s.label + (" *" if s.required else ""), id=f"label-{s.name}")
        control: Widget
        if s.options is not None:
            control = FieldSelect(
                [(label, value) for label, value in s.options],
                value=s.value if s.value in [v for _, v in s.options] else Select.NULL,
                allow_blank=not s.required or s.value not in [v for _, v in s.options],
                prompt="–",
                compact=True,
                id=f"f-{s.name}",
                disabled=s.disabled,
            )
        elif s.check is not None:
            control = TickBox(value=s.check, words=("yes", "no"), compact=True, id=f"f-{s.name}")
        else:
            control = FieldInput(
                s.value,
                placeholder=s.placeholder,
                validators=s.validators,
                valid_empty=not s.required,
                validate_on=["changed", "submitted"],
                compact=True,
                id=f"f-{s.name}",
                disabled=s.disabled,
            )
        yield control
        yield Static(s.hint, classes="field-msg", id=f"m-{s.name}", markup=False)

    @property
    def control(self) -> Widget:
        return self.query_one(f"#f-{self.spec.name}")

    def value(self) -> str | bool | None:
        return value_of(self.control)

    def check_value(self, force: bool = False, value: object = NOW) -> str | None:
        """Validate the field as it is now, or `value` as read at a save key (see
        `value_of`); show the message; return it (None when the field is fine)."""
        c = self.control
        if value is NOW:
            value = value_of(c)
        problem: str | None = None
        if value is OPEN_LIST:
            problem = LIST_OPEN
        elif isinstance(c, Input):
            text = str(value or "")
            if not text:
                problem = "required" if self.spec.required else None
            else:
                result = c.validate(text)
                if result is not None and not result.is_valid:
                    problem = "; ".join(result.failure_descriptions) or "not valid"
        elif isinstance(c, Select) and self.spec.required and value is None:
            problem = "choose one"
        if force or self.shown or problem is None:
            self.show(problem)
        return problem

    def show(self, problem: str | None) -> None:
        msg = self.query_one(".field-msg", Static)
        if problem:
            self.shown = True
            msg.update("✗ " + problem)
            msg.add_class("-bad")
        else:
            msg.update(self.spec.hint)
            msg.remove_class("-bad")

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.value.strip():
            self.check_value(force=True)
        elif self.shown:
            self.check_value()

    def on_select_changed(self, event: Select.Changed) -> None:
        if self.shown:  # a '✗ choose one' (or a refusal) goes once a choice is made
            self.check_value()


def value_of(control: Widget) -> str | bool | object | None:
    """What a field holds: an Input's text (stripped), a tick box's state, a choice's value
    (None when none; OPEN_LIST while its list is open, a pick on its way)."""
    if isinstance(control, Input):
        return control.value.strip()
    if isinstance(control, Checkbox):
        return control.value
    if isinstance(control, Select):
        if control.expanded:
            return OPEN_LIST
        return None if control.value is Select.NULL else str(control.value)
    return None
