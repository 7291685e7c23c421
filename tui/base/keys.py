"""Every key of the app in one table: the key strip, the help screen and the command palette
all take their words from here, so that a key reads the same wherever it is named.

A binding is made with `bind(keys, action, id)`; its short word (`Binding.description`) and
its meaning (`Binding.tooltip`) come from `KEYS[id]`.
"""

from __future__ import annotations

from dataclasses import dataclass

from textual.binding import Binding

GROUPS = ("log", "look", "book")  # write entries · move and see · the logbook as a whole


@dataclass(frozen=True)
class Key:
    shown: str  # as the help and the strip write it: "r", "ctrl+p", "[", "f5", "Enter"
    word: str  # the strip's word and the help's second column
    meaning: str  # the help's line and the palette's title
    group: str  # one of GROUPS
    rank: int  # lower stays longer on a narrow key strip (0: always)
    also: str = ""  # another key for the same, named in the help only


KEYS: dict[str, Key] = {
    # log: write an entry
    "log-reading": Key("r", "read", "Log a ΔP reading", "log", 1),
    "log-change": Key("c", "change", "Log an element change", "log", 2),
    "log-breather": Key("b", "swap", "Log a breather swap", "log", 4),
    "log-topup": Key("o", "top-up", "Log an oil top-up", "log", 4),
    "log-sample": Key("s", "sample", "Log a sample result", "log", 5),
    "log-note": Key("n", "note", "Write a note", "log", 5),
    "quick-tag": Key("t", "tag", "Type or scan a tag, then log on it", "log", 1, "f2"),
    "shift-void": Key("v", "void", "Void the selected entry (it stays, marked void)", "log", 2),
    # look: move around and see
    "back": Key("esc", "back", "Back to where you came from", "look", 1),
    "go-watch": Key("1", "watch", "The watch list", "look", 2),
    "go-shift": Key("2", "shift log", "The shift log", "look", 3),
    "go-register": Key("3", "register", "The register", "look", 3),
    "go-round": Key("4", "round", "The round: what to read this shift", "look", 3),
    "round-skip": Key("ctrl+o", "skip", "Skip this filter and say why (kept as a note)", "log", 1),
    "round-next": Key(
        "ctrl+n", "next shift", "The next shift's round (again: this one's)", "look", 3
    ),
    "round-leave": Key(
        "esc",
        "watch",
        "Back to the watch list; what is typed stays for when you come back",
        "look",
        1,
    ),
    "round-up": Key("↑", "before", "The filter before on the round", "look", 2),
    "round-down": Key("↓", "after", "The next filter on the round", "look", 2),
    "unit-sheet": Key("u", "unit", "Open the unit sheet", "look", 3),
    "find": Key("/", "find", "Find by text", "look", 4),
    "area": Key("a", "area", "Show one area or unit", "look", 6),
    "recompute": Key("f5", "recompute", "Recompute the watch list", "look", 7),
    "shift-earlier": Key("[", "earlier", "The shift before", "look", 2),
    "shift-later": Key("]", "later", "The shift after", "look", 2),
    "shift-current": Key(".", "now", "The shift on now", "look", 3),
    "shift-go": Key("g", "go to", "Go to a shift by date and name", "look", 4),
    "reg-prev": Key("[", "prev tab", "The tab before", "look", 3),
    "reg-next": Key("]", "next tab", "The tab after", "look", 3),
    # book: the logbook as a whole
    "reg-add": Key("a", "add", "Add to the register", "book", 2),
    "reg-edit": Key("e", "edit", "Edit the selected row", "book", 2),
    "shift-export": Key("x", "export", "Export this shift as CSV", "book", 2),
    "sign-in": Key("i", "who", "Who is on shift (sign in)", "book", 6),
    "help": Key("?", "help", "Help: every key and what the words on screen mean", "book", 0, "f1"),
    "palette": Key("ctrl+p", "commands", "Every action by name (command palette)", "book", 7),
    "quit": Key("q", "quit", "Quit (makes a backup)", "book", 4),
    "quit-now": Key(
        "ctrl+q", "quit", "Quit from anywhere, even a form (makes a backup)", "book", 9
    ),
}

# Enter is no binding of its own: what it does on each screen that has it.
ENTER = {
    "the watch list": Key("Enter", "open", "Open the sheet of the row under the cursor", "look", 3),
    "the unit sheet": Key(
        "Enter", "open", "Open the filter sheet of the filter under the cursor", "look", 3
    ),
    "the register": Key("Enter", "edit", "Edit the selected row", "book", 3),
    "the round": Key("Enter", "save", "Save the reading and move to the next filter", "log", 1),
}


def bind(keys: str, action: str, id: str, **options: object) -> Binding:
    """A binding whose words come from the table."""
    key = KEYS[id]
    return Binding(keys, action, key.word, tooltip=key.meaning, id=id, **options)  # type: ignore[arg-type]


def key_of(binding: Binding) -> Key:
    """The table's entry for a binding; a binding made elsewhere gets one from its own words."""
    if binding.id in KEYS:
        return KEYS[binding.id]
    first = binding.key.split(",")[0].strip()
    shown = {"escape": "esc", "enter": "Enter"}.get(first, first)
    word = (binding.description or first).lower()
    return Key(shown, word, binding.tooltip or binding.description, "look", 5)
