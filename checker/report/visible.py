"""Text from the input made harmless for a terminal or an HTML page.

A net, layer or file name is the input's to choose; one carrying control
characters (ESC starting a terminal escape sequence that clears the screen
or sets the window title, BEL, NUL, the C1 controls U+0080-U+009F) must
not reach the terminal raw. ``visible`` shows each such character as a
``\\xNN`` escape instead, so the name stays recognisable and nothing is
executed. XML outputs (SVG, JUnit) use :func:`xml_visible`: the same
escapes for everything XML 1.0 cannot carry or asks authors to avoid.
JSON escapes C0 itself; the JSON report escapes DEL and C1 as ``\\u00XX``.
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


# XML 1.0 (section 2.2) allows Tab, LF, CR and U+0020-U+D7FF, U+E000-U+FFFD,
# U+10000-U+10FFFF, and asks authors to avoid DEL and the C1 controls.
_NOT_FOR_XML = re.compile("[^\t\n\r\u0020-\u007e\u00a0-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def xml_visible(text: object) -> str:
    r"""``text`` as a string XML 1.0 can hold and a reader can see: every
    character XML forbids or discourages (C0 controls but Tab/LF/CR, DEL,
    C1 controls, lone surrogates, U+FFFE/U+FFFF) written as ``\xNN``
    (``\uNNNN`` above U+00FF).

    >>> print(xml_visible("CLK\x1b[2J\x9b"))
    CLK\x1b[2J\x9b
    """
    def shown(m: re.Match) -> str:
        code = ord(m.group())
        return f"\\x{code:02x}" if code <= 0xFF else f"\\u{code:04x}"

    return _NOT_FOR_XML.sub(shown, str(text))
