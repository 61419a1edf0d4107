"""Every key of the monitor in one table: the bindings, the key bar, the help screen and docs/monitor.md agree."""

from __future__ import annotations

from dataclasses import dataclass

SHELVE_S = 300.0  # how long `s` shelves an alert, s (our choice: five minutes, common practice, no source)
STEP_ROWS = 10  # recorded lines one replay step hands on
SEEK_SHORT_S = 5.0
SEEK_LONG_S = 60.0
SPEEDS = (0.0625, 0.125, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 64.0)  # replay speeds + and - step through
ALL_MODES = frozenset({"live", "demo", "replay"})
REPLAY = frozenset({"replay"})


@dataclass(frozen=True)
class Key:
    """One operator key.

    Attributes:
        keys: textual key names that trigger it (the first is the main one).
        label: how the key is written on screen.
        action: the screen action it runs.
        short: the word in the key bar ('' keeps it out of the bar).
        description: the help screen's sentence.
        modes: the modes in which it works.
    """

    keys: tuple[str, ...]
    label: str
    action: str
    short: str
    description: str
    modes: frozenset[str] = ALL_MODES


KEYS: tuple[Key, ...] = (
    Key(("q", "ctrl+q", "ctrl+c"), "q", "request_quit", "quit",
        "Quit. While a run is being recorded, asks first (y / n) and then closes the log cleanly."),
    Key(("question_mark", "f1"), "?", "help", "help", "This list of keys, the alert states and the cautions."),
    Key(("a",), "a", "acknowledge", "ack", "Acknowledge the selected alert (the one marked >)."),
    Key(("A",), "A", "acknowledge_all", "ack all", "Acknowledge every alert at once."),
    Key(("s",), "s", "shelve", "shelve",
        f"Shelve the selected alert for {SHELVE_S / 60:g} min: it is hidden from the attention banner and the "
        "bell until the time runs out. The MEOP alert cannot be shelved."),
    Key(("u",), "u", "unshelve", "", "Unshelve the selected alert at once."),
    Key(("up", "k"), "↑ k", "select(-1)", "", "Select the alert above."),
    Key(("down", "j"), "↓ j", "select(1)", "", "Select the alert below."),
    Key(("left_square_bracket",), "[", "window(-1)", "", "Shorten the trend window (10 s, 30 s, 1, 2, 5, 10 min)."),
    Key(("right_square_bracket",), "]", "window(1)", "window",
        "Lengthen the trend window."),
    Key(("l",), "l", "link", "link",
        "Link health in full: every channel's rate, age and bad samples, link events, recording, notes."),
    Key(("space",), "space", "pause", "pause", "Pause or resume the replay.", REPLAY),
    Key(("full_stop",), ".", "step", "step", f"Step the paused replay on by {STEP_ROWS} recorded lines.", REPLAY),
    Key(("plus", "equals_sign"), "+", "speed(1)", "", "Replay faster (doubles the speed, up to x64).", REPLAY),
    Key(("minus",), "-", "speed(-1)", "speed", "Replay slower (halves the speed, down to x1/16).", REPLAY),
    Key(("right",), "→", f"seek({SEEK_SHORT_S:g})", "", f"Jump {SEEK_SHORT_S:g} s forward in the log.", REPLAY),
    Key(("left",), "←", f"seek({-SEEK_SHORT_S:g})", "seek",
        f"Jump {SEEK_SHORT_S:g} s back (estimates and alerts carry on from where they were).", REPLAY),
    Key(("pagedown",), "PgDn", f"seek({SEEK_LONG_S:g})", "", f"Jump {SEEK_LONG_S:g} s forward.", REPLAY),
    Key(("pageup",), "PgUp", f"seek({-SEEK_LONG_S:g})", "", f"Jump {SEEK_LONG_S:g} s back.", REPLAY),
)

# Keys of the screens on top of the monitor (help, link health, quit question).
CLOSE_KEYS = ("escape", "q", "question_mark", "l", "f1")


def keys_for(mode: str) -> tuple[Key, ...]:
    """The keys that work in a mode ('live', 'demo' or 'replay')."""
    return tuple(k for k in KEYS if mode in k.modes)


def key_bar_items(mode: str) -> tuple[tuple[str, str], ...]:
    """(key label, word) pairs for the key bar, in table order; pairs like [ and ] share one item."""
    items: list[tuple[str, str]] = []
    keys = keys_for(mode)
    # a replay's own keys come right after q and ?, so that they show on an 80-column screen
    keys = keys[:2] + tuple(k for k in keys[2:] if k.modes == REPLAY) + tuple(k for k in keys[2:] if k.modes != REPLAY)
    for key in keys:
        if not key.short:
            continue
        label = key.label
        if key.action == "window(1)":
            label = "[ ]"
        elif key.action == "speed(-1)":
            label = "+ -"
        elif key.action.startswith("seek") and key.short:
            label = "← →"
        items.append((label, key.short))
    at = next(k for k, item in enumerate(items) if item[1] == "ack all") + 1
    items.insert(at, ("↑↓", "select"))
    return tuple(items)
