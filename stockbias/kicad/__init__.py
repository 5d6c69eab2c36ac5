"""KiCad boards in and out: netlists read into board files, changes written back.

One concern per module: :mod:`.sexpr` (S-expressions with token offsets),
:mod:`.netlist` (the netlist exports), :mod:`.graph` (the DC graph),
:mod:`.classify` (networks and roles), :mod:`.board_writer` (the board file),
:mod:`.changes` (the change list by reference designator) and :mod:`.schematic`
(the textual edit of a ``.kicad_sch``).  Standard library only.
"""

__all__ = ["STOCK_FIELD"]

#: the symbol field that names a part's stock line: read by the import, written back by
#: ``--schematic-out`` beside the Value
STOCK_FIELD = "Stock part"
