"""The fabrication-export door: Gerber X2 copper layers, the Gerber job
file's stackup, Excellon drills and an IPC-D-356 netlist, turned into the
same :class:`checker.model.Board` the JSON door produces.

Each format has its own reader module returning a plain intermediate
object (``layer.py``); ``package.py`` finds the files of a fabrication
package, ``assemble.py`` reads them and ``build.py`` joins the read layers into a Board (stackup, nets by
attribute or by connectivity, vias from plated holes).
"""
