"""Resolve the relay once: its ends and the Z1, k0 and k0m every later step uses."""

from __future__ import annotations

import cmath

from relayset.inputs.study_file import Study
from relayset.results.parameters import LineParameters
from relayset.results.relay import RelayBasis


def resolve_relay(study: Study, params: LineParameters) -> RelayBasis:
    """The relay basis of a study: ``[relay]`` values where given, else the line's own.

    Z1 and k0 default to those of the ideally transposed line (the diagonal of its Z012),
    k0m to Z0M/(3 Z1) of the actual plan. A given Z1 does not change the default k0: k0 is
    a property of the line, and the relay's zero-sequence replica is Z1_set (1 + 3 k0).
    """
    relay = study.relay
    if relay is None:  # a caller's mistake: inputs.check_reach_inputs says it to the user
        raise ValueError("resolve_relay needs a study with a [relay] table")
    ends = study.relay_ends  # relay.end was checked against the line's ends when read
    circ = params.circuits[0]
    k0m = None
    if len(params.circuits) == 2:
        k0m = (cmath.rect(relay.k0m_set.magnitude, relay.k0m_set.angle)
               if relay.k0m_set is not None else params.k0m)
    return RelayBasis(
        ends=tuple(ends),
        z1_set_ohm=complex(relay.z1_set if relay.z1_set is not None else circ.z1_ohm),
        k0_set=complex(cmath.rect(relay.k0_set.magnitude, relay.k0_set.angle)
                       if relay.k0_set is not None else circ.k0.k0),
        k0m_set=None if k0m is None else complex(k0m),
        z1_given=relay.z1_set is not None,
        k0_given=relay.k0_set is not None,
        k0m_given=relay.k0m_set is not None and k0m is not None,
        ct_ratio=relay.ct_ratio,
        vt_ratio=relay.vt_ratio,
    )
