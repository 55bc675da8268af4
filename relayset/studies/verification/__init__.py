"""Verification: the zones as set, tested by fault simulation of the real line.

- :mod:`.envelope`: what is swept (load, fault resistance, earth resistivity), from the study;
- :mod:`.simulation`: the batched phase-domain solves over the envelope (no settings);
- :mod:`.relay_model`: what the relay measures (loops, directional elements, release
  currents, mutual compensation and its supervision);
- :mod:`.checks`: each requirement on each zone, its margin and governing case;
- :mod:`.branches`: faults along the lines behind and beyond the line (radial), their checks;
- :mod:`.closing`: settings closed by the simulation, then verified;
- :mod:`.replay`: one case of a verification solved again on its own (the network's
  phasors at the relay, for the governing cases' COMTRADE files).
"""

from relayset.studies.verification.checks import (
    infeed_range,
    reach_scale,
    relay_model_at,
    verify_settings,
)
from relayset.studies.verification.closing import params_by_resistivity, settle_and_verify
from relayset.studies.verification.envelope import Envelope, build_envelope
from relayset.studies.verification.relay_model import RelayModel, view
from relayset.studies.verification.simulation import Run, Simulation, simulate, swap_circuits

__all__ = ["Envelope", "RelayModel", "Run", "Simulation", "build_envelope", "infeed_range",
           "params_by_resistivity", "reach_scale", "relay_model_at", "settle_and_verify",
           "simulate", "swap_circuits", "verify_settings", "view"]
