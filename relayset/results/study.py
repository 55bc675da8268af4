"""The whole study's results: identity, input basis and every result, read-only."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import PurePath
from typing import TYPE_CHECKING, Any

from relayset.results.deprecated import alias

if TYPE_CHECKING:  # annotations only: `relayset params` loads no reach/settings types
    from relayset.results.parameters import LineParameters
    from relayset.results.reach import ReachStudyResult
    from relayset.results.relay import RelayBasis
    from relayset.results.settings import SettingsResult
    from relayset.results.teed import TeedStudyResult
    from relayset.results.teed_reach import TeedReachResult
    from relayset.results.verification import VerificationResult

CAUTION = (
    "This calculation must be reviewed and approved by a licensed professional engineer "
    "before use. Local codes, the utility's setting philosophy and the relay manufacturer's "
    "instructions prevail over anything computed here."
)


@dataclass(frozen=True)
class StudyResults:
    """The whole study: its identity, the input basis and every result, read-only."""

    relayset_version: str
    source_file: str
    source_sha256: str
    input: dict[str, Any]  #: the study file as read (TOML tables), for the archive
    study: dict[str, Any]  #: the study's identity (line id, ends, revision, names)
    parameters: LineParameters
    relay: RelayBasis | None = None  #: the relay basis, resolved once (reach and settings)
    reach_study: ReachStudyResult | None = None
    settings: tuple[SettingsResult, ...] | None = None  #: one per relay end
    philosophy: dict[str, Any] | None = None  #: the setting philosophy applied
    verification: VerificationResult | None = None  #: the settings tested by simulation
    caution: str = CAUTION
    #: a three-terminal (teed) line's reach study, zones and their verification, in place
    #: of ``reach_study``, ``settings`` and ``verification`` (relayset.studies.teed)
    teed: TeedStudyResult | None = None
    #: a three-terminal line's reach study (``relayset reach``; relayset.studies.teed_reach),
    #: in place of ``reach_study``
    teed_reach: TeedReachResult | None = None

    # Old names (relayset 0.2), one release.
    identity = alias("study", "identity")
    study_input = alias("input", "study_input")
    reach = alias("reach_study", "reach")

    def frames(self):
        """Every result as a pandas DataFrame, by name (:func:`relayset.frames.frames`)."""
        from relayset.frames import frames

        return frames(self)

    def to_dict(self) -> dict[str, Any]:
        d: dict[str, Any] = {
            "relayset_version": self.relayset_version,
            "caution": self.caution,
            "source_file": PurePath(self.source_file).name,  # no folder: same bytes anywhere
            "source_sha256": self.source_sha256,
            "study": self.study,
            "parameters": self.parameters.to_dict(),
        }
        if self.relay is not None:
            d["relay"] = self.relay.to_dict()
        if self.reach_study is not None:
            d["reach_study"] = self.reach_study.to_dict()
        if self.settings is not None:
            d["settings"] = {"ends": [s.to_dict() for s in self.settings]}
            d["philosophy"] = self.philosophy
        if self.verification is not None:
            d["verification"] = self.verification.to_dict()
        if self.teed is not None:
            d["teed"] = self.teed.to_dict()
            d["philosophy"] = self.philosophy
        if self.teed_reach is not None:
            d["teed_reach"] = self.teed_reach.to_dict()
        d["input"] = self.input
        return d
