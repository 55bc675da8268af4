"""Published line data of the IEEE PES distribution test feeders (data only, no code).

Everything here is in the units of the documents (feet, inches, ohm/mile, microsiemens/mile)
so that each number can be compared with the page it came from; the tests convert with the
exact factors below. See README.md in this folder for the full provenance of every case.

Documents
---------
[F4]  IEEE PES Distribution System Analysis Subcommittee, "IEEE 4 Node Test Feeder"
      (data files distributed by the Test Feeder Working Group; W. H. Kersting).
[F13] IEEE PES Distribution System Analysis Subcommittee, "IEEE 13 Node Test Feeder",
      sections "Overhead Line Configuration Data", "Overhead line spacings" and
      "Impedances"; published with W. H. Kersting, "Radial distribution test feeders,"
      Proc. IEEE PES Winter Meeting, 2001, vol. 2, pp. 908-912.
[K]   W. H. Kersting, "Distribution System Modeling and Analysis", 4th ed., CRC Press, 2017:
      ch. 4 (modified Carson equations, 60 Hz, 100 ohm·m: 0.09530 ohm/mi and
      0.12134·(ln(1/D) + 7.93402) ohm/mi), ch. 5 (potential coefficients
      11.17689·ln(S/d) mile/µF), Appendix A (conductor data).

How the published matrices were confirmed: the [F13] "Impedances" page was read in a stored
public copy of the 13-node document; the same 601, 602 and 603 matrices appear, digit for
digit, in several independent public transcriptions used by power-flow models. The [F4]
matrix was read in two independent public transcriptions (the 4-node document itself was
not read); they agree digit for digit.
"""

from __future__ import annotations

# Exact unit factors (international foot, inch and statute mile).
FT_M = 0.3048
IN_M = 0.0254
MILE_M = 1609.344

# Constants of the published computation ([K] ch. 4 and 5): 60 Hz, 100 ohm·m, modified
# Carson equations; Kersting's rounded potential-coefficient factor 1/(2π ε0) in mile/µF.
FREQUENCY_HZ = 60.0
RESISTIVITY_OHM_M = 100.0
KERSTING_P_FACTOR_MILE_PER_UF = 11.17689

# Conductors: outside diameter [in], GMR [ft], resistance at 50 degC, 60 Hz [ohm/mile].
CONDUCTORS: dict[str, dict[str, object]] = {
    "556,500 26/7 ACSR": {
        "diameter_in": 0.927,
        "gmr_ft": 0.0313,
        "r_ohm_per_mile": 0.1859,
        "source": "[F13] conductor data (phase conductor of configuration 601); [K] App. A",
    },
    "336,400 26/7 ACSR": {
        "diameter_in": 0.721,
        "gmr_ft": 0.0244,
        "r_ohm_per_mile": 0.306,
        "source": "[F4] phase conductor; [K] App. A",
    },
    "4/0 6/1 ACSR": {
        "diameter_in": 0.563,
        "gmr_ft": 0.00814,
        "r_ohm_per_mile": 0.592,
        "source": "[F13] (601 neutral, 602 phase and neutral); [F4] neutral; [K] App. A",
    },
    "1/0 ACSR": {
        "diameter_in": 0.398,
        "gmr_ft": 0.00446,
        "r_ohm_per_mile": 1.12,
        "source": "[F13] (603, 604, 605 phase and neutral); [K] App. A",
    },
}

# Spacings: positions (x, height) in ft, left to right, the neutral last.
SPACINGS: dict[str, dict[str, object]] = {
    "500": {
        "positions_ft": [(0.0, 28.0), (2.5, 28.0), (7.0, 28.0), (4.0, 24.0)],
        "source": "[F13] figure 'Overhead line spacings', ID 500: 2.5 ft and 4.5 ft between "
        "the three phase positions at 28 ft, neutral 4 ft from the left at 24 ft "
        "(pairwise distances 2.5, 4.5, 7.0, 5.6569, 4.2720, 5.0 ft, as tabulated in public "
        "models of the feeder); [F4] uses the same geometry",
    },
    "505": {
        "positions_ft": [(0.0, 28.0), (7.0, 28.0), (4.0, 24.0)],
        "source": "[F13] figure 'Overhead line spacings', ID 505 - coordinates from memory "
        "(7 ft between the two phase positions at 28 ft, neutral 4 ft from the left at "
        "24 ft); confirmed only in that they reproduce the published 603 matrix",
    },
}

# Configurations. "phasing" lists the phase in each spacing position, left to right, then
# N. Published matrices: rows and columns are phases a, b, c (absent phases zero);
# z in ohm/mile (R + jX), b in µS/mile (shunt susceptance, capacitive).
CONFIGURATIONS: dict[str, dict[str, object]] = {
    "601": {
        "spacing": "500",
        "phasing": "BACN",
        "phase_conductor": "556,500 26/7 ACSR",
        "neutral_conductor": "4/0 6/1 ACSR",
        "z_ohm_per_mile": [
            [0.3465 + 1.0179j, 0.1560 + 0.5017j, 0.1580 + 0.4236j],
            [0.1560 + 0.5017j, 0.3375 + 1.0478j, 0.1535 + 0.3849j],
            [0.1580 + 0.4236j, 0.1535 + 0.3849j, 0.3414 + 1.0348j],
        ],
        "b_us_per_mile": [
            [6.2998, -1.9958, -1.2595],
            [-1.9958, 5.9597, -0.7417],
            [-1.2595, -0.7417, 5.6386],
        ],
        "source": "[F13] 'Impedances', Configuration 601 (Z in ohms per mile, B in micro "
        "Siemens per mile)",
    },
    "602": {
        "spacing": "500",
        "phasing": "CABN",
        "phase_conductor": "4/0 6/1 ACSR",
        "neutral_conductor": "4/0 6/1 ACSR",
        "z_ohm_per_mile": [
            [0.7526 + 1.1814j, 0.1580 + 0.4236j, 0.1560 + 0.5017j],
            [0.1580 + 0.4236j, 0.7475 + 1.1983j, 0.1535 + 0.3849j],
            [0.1560 + 0.5017j, 0.1535 + 0.3849j, 0.7436 + 1.2112j],
        ],
        "b_us_per_mile": [
            [5.6990, -1.0817, -1.6905],
            [-1.0817, 5.1795, -0.6588],
            [-1.6905, -0.6588, 5.4246],
        ],
        "source": "[F13] 'Impedances', Configuration 602",
    },
    "603": {
        "spacing": "505",
        "phasing": "CBN",
        "phase_conductor": "1/0 ACSR",
        "neutral_conductor": "1/0 ACSR",
        "z_ohm_per_mile": [
            [0.0, 0.0, 0.0],
            [0.0, 1.3294 + 1.3471j, 0.2066 + 0.4591j],
            [0.0, 0.2066 + 0.4591j, 1.3238 + 1.3569j],
        ],
        "b_us_per_mile": [
            [0.0, 0.0, 0.0],
            [0.0, 4.7097, -0.8999],
            [0.0, -0.8999, 4.6658],
        ],
        "source": "[F13] 'Impedances', Configuration 603",
    },
    "4-node": {
        "spacing": "500",
        "phasing": "ABCN",
        "phase_conductor": "336,400 26/7 ACSR",
        "neutral_conductor": "4/0 6/1 ACSR",
        "z_ohm_per_mile": [
            [0.4576 + 1.0780j, 0.1559 + 0.5017j, 0.1535 + 0.3849j],
            [0.1559 + 0.5017j, 0.4666 + 1.0482j, 0.1580 + 0.4236j],
            [0.1535 + 0.3849j, 0.1580 + 0.4236j, 0.4615 + 1.0651j],
        ],
        "b_us_per_mile": None,  # not read in any source that could be checked
        "source": "[F4] phase impedance matrix of the four-wire wye line (both line "
        "segments), as transcribed in two independent public models of the 4-node feeder",
    },
}
