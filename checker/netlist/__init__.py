"""Netlists in: the netlist map, stage extraction and the stage-file writer.

``checker/io/netlist_reader.py`` reads a netlist's syntax; this package gives it meaning:
``mapping`` reads the netlist map (which subcircuits are which op-amps, which nets are
supplies, what sits at the board's edge), ``extract`` cuts the board into op-amp stages
as the same plain tree the stage readers produce, ``load`` runs the two for one file and
``stage_writer`` writes the extracted stages as stage files.
"""

NETLIST_ENDINGS = (".cir", ".ckt", ".net", ".sp", ".spi")
MAP_ENDING = ".netmap"


def is_netlist(path: str) -> bool:
    """Whether ``path`` has one of the netlist endings (case-insensitive)."""
    return path.lower().endswith(NETLIST_ENDINGS)
