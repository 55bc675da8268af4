"""Every size limit on the input, in one place, each far above what a real line needs.

A hostile or broken file (a megabyte of nested brackets, a million sections) is refused with
one line before it costs memory or time; no real study comes near any of these values. The
shipped demo studies are 2-3 KB, nest 5 levels deep and have at most 3 sections, 2
circuits, 1 shield wire and 4 fault resistances (common practice, no source, for what real
lines have; the values below leave a factor of 10 or more).
"""

from __future__ import annotations

#: Size of a study or philosophy file [bytes]. The largest demo study is 2.8 KB; a double
#: circuit with 100 sections, long notes and a long revision history stays under 50 KB.
MAX_FILE_BYTES = 1024 * 1024

#: Depth of tables, lists and dotted-key parts from the top of a file [levels]. The deepest
#: value of a study (circuits[0].positions[0].bundle.count) is 6 levels down; the TOML
#: reader itself fails near 300 levels of brackets and needs memory growing with the square
#: of the parts of one dotted key, so the depth is checked on the raw text first.
MAX_DEPTH = 32

#: Transposition sections of one line ([line] sections). Real lines have 1 to about 10
#: (three per transposition cycle), a route with changing towers some tens; each section is
#: a matrix product in every fault case.
MAX_SECTIONS = 1000

#: Shield (earth) wires of one tower. Real towers carry 0 to 2 (rarely 4); with 2 circuits
#: of 3 positions and bundles of up to 8, a tower stays at most 6 + 8 conductors across.
MAX_SHIELD_WIRES = 8

#: Tower types of one study ([towers.NAME]); a line rarely has more than a handful.
MAX_TOWERS = 50

#: Conductor types of one study. Real studies name 1 to 3 (phase, earth wire, OPGW).
MAX_CONDUCTOR_TYPES = 50

#: Fault locations of one reach study (reach_study.locations_pct), the same as the finest
#: location step (0.01 % of the line, 10 001 locations); 101 is the default.
MAX_LOCATIONS = 10_001

#: Fault resistances, source cases and load cases (transfer angles or power flows) of one
#: reach study, each. Real studies sweep 3 to 10 of each; their product is bounded by the
#: case limits below.
MAX_SWEEP_VALUES = 1000

#: Fault types listed in reach_study.fault_types: the ten types, each once.
MAX_FAULT_TYPES = 10

#: Adjacent lines (and lines behind) of one study, each. A busbar has at most a few tens of
#: feeders.
MAX_ADJACENT_LINES = 50

#: Entries of any other list or named table of a study (revisions, source-case factors,
#: relay ends) when no smaller limit applies.
MAX_ITEMS = 1000

#: Fault cases one reach study solves (all arrangements): types x locations x resistances x
#: source cases x load cases. The demo studies solve 10 000 to 50 000.
MAX_CASES = 10_000_000

#: Fault cases at one location (the smallest chunk of the sweep, ~0.5 kB each in memory).
MAX_CASES_PER_LOCATION = 200_000
