"""Input doors: each turns one kind of file into a :class:`checker.model.Board`.

``load_board(path)`` reads the neutral board JSON format
(``docs/board-format.md``); ``read_board_dict(data, file)`` does the same for
data already in memory.
"""

from .board_json import load_board, read_board_dict

__all__ = ["load_board", "read_board_dict"]
