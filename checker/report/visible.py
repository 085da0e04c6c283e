"""Text from the input made harmless for a terminal or an HTML page.

A net, layer or file name is the input's to choose; one carrying control
characters (ESC starting a terminal escape sequence that clears the screen
or sets the window title, BEL, NUL, the C1 controls U+0080-U+009F) must
not reach the terminal raw. ``visible`` shows each such character as a
``\\xNN`` escape instead, so the name stays recognisable and nothing is
executed. JSON (``json.dumps`` escapes controls) and XML outputs (SVG,
JUnit: characters XML cannot carry are replaced) have their own rules.
"""

from __future__ import annotations

import re

_CONTROLS = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_CONTROLS_AND_BREAKS = re.compile("[\x00-\x1f\x7f-\x9f]")


def visible(text: str, keep_lines: bool = False) -> str:
    """``text`` with every C0/C1 control character (and DEL) written as
    ``\\xNN``; tabs and line breaks too, unless ``keep_lines`` (a message
    laid out on several lines on purpose)."""
    pattern = _CONTROLS if keep_lines else _CONTROLS_AND_BREAKS
    return pattern.sub(lambda m: f"\\x{ord(m.group()):02x}", text)
