"""Big digits for the numbers read from across a room: a 3-by-5 dot font drawn with block characters.

Two sizes: `small` packs two dot rows into one text row with half blocks (3 rows high, 4 columns a digit);
`large` draws every dot as two full blocks (5 rows high, 7 columns a digit). Characters without a glyph
(letters) are drawn as blanks of a digit's width, so a caller should pass only what numbers contain.
"""

from __future__ import annotations

# Each glyph: five rows of dots, '#' lit, '.' dark; narrow glyphs (point, colon) are one dot wide.
_DOTS: dict[str, tuple[str, ...]] = {
    "0": ("###", "#.#", "#.#", "#.#", "###"),
    "1": (".#.", "##.", ".#.", ".#.", "###"),
    "2": ("###", "..#", "###", "#..", "###"),
    "3": ("###", "..#", ".##", "..#", "###"),
    "4": ("#.#", "#.#", "###", "..#", "..#"),
    "5": ("###", "#..", "###", "..#", "###"),
    "6": ("###", "#..", "###", "#.#", "###"),
    "7": ("###", "..#", ".#.", ".#.", ".#."),
    "8": ("###", "#.#", "###", "#.#", "###"),
    "9": ("###", "#.#", "###", "..#", "###"),
    "-": ("...", "...", "###", "...", "..."),
    "+": ("...", ".#.", "###", ".#.", "..."),
    "%": ("#.#", "..#", ".#.", "#..", "#.#"),
    ".": (".", ".", ".", ".", "#"),
    ":": (".", "#", ".", "#", "."),
    " ": ("...", "...", "...", "...", "..."),
}
_HALF = {(False, False): " ", (True, False): "▀", (False, True): "▄", (True, True): "█"}
SMALL_ROWS = 3
LARGE_ROWS = 5


def _dots(char: str) -> tuple[str, ...]:
    return _DOTS.get(char, _DOTS[" "])


def small(text: str) -> list[str]:
    """Three text rows drawing `text` with half blocks; one blank column between glyphs."""
    rows = ["", "", ""]
    for index, char in enumerate(text):
        dots = _dots(char) + ("." * len(_dots(char)[0]),)  # a dark sixth row under the fifth
        for row in range(3):
            top, bottom = dots[2 * row], dots[2 * row + 1]
            cells = "".join(_HALF[(a == "#", b == "#")] for a, b in zip(top, bottom))
            rows[row] += cells + (" " if index < len(text) - 1 else "")
    return rows


def large(text: str) -> list[str]:
    """Five text rows drawing `text` with two full blocks per dot; one blank column between glyphs."""
    rows = [""] * LARGE_ROWS
    for index, char in enumerate(text):
        for row, dots in enumerate(_dots(char)):
            rows[row] += "".join("██" if d == "#" else "  " for d in dots) + (" " if index < len(text) - 1 else "")
    return rows


def width(text: str, size: str = "small") -> int:
    """Columns `text` takes in the given size ('small' or 'large')."""
    per_dot = 1 if size == "small" else 2
    glyphs = sum(len(_dots(c)[0]) * per_dot for c in text)
    return glyphs + max(len(text) - 1, 0)
