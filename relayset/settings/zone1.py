r"""Zone 1: the one place where its reach is chosen.

Derivation
----------
A relay set at reach r (percent of the line) can reach further than set by the error budget
b (CT, VT, relay and line-data errors, summed) and by the overreach e that the reach study
found for the meant loops at the remote bus (underreach, e < 0, is not counted in favour).
Both are fractions of the setting, so the worst-case reach is r (1 + (b + max(0, e))/100),
and it must stay the philosophy's margin short of the remote bus.
"""

from __future__ import annotations

import math

from relayset.errors import InputError
from relayset.results.settings import Check
from relayset.settings.context import RuleContext


def recommended_zone1_pct(
    worst_overreach_pct: float,
    error_budget_pct: float,
    philosophy_max_pct: float,
    margin_pct: float = 0.0,
) -> float:
    r"""Largest zone 1 reach whose worst-case reach stays short of the remote bus.

    A relay set at reach r (percent of the line) can reach further than set by the error
    budget b (CT, VT, relay and line-data errors, summed) and by the untransposition
    overreach e that the study computed for the meant loops (underreach, e < 0, is not
    counted in favour). Both are fractions of the setting, so the worst-case reach is
    :math:`r\,(1 + (b + \max(0, e))/100)`, and it must stay at least the margin m short
    of the remote bus:

    .. math:: r \le \frac{100 - m}{1 + (b + \max(0, e))/100}\ [\%]

    capped at the protection philosophy's zone 1 and rounded down to 0.5 %.

    Parameters
    ----------
    worst_overreach_pct : float
        Worst reach error of the meant loops over all studied cases [%] (positive:
        overreach).
    error_budget_pct : float
        Sum of the CT, VT, relay and line-data errors [%], >= 0.
    philosophy_max_pct : float
        Zone 1 reach of the protection philosophy, the upper limit [%], in (0, 100].
    margin_pct : float
        Extra margin short of the remote bus beyond the errors [%], in [0, 100).

    Returns
    -------
    float
        Recommended zone 1 reach [% of line].
    """
    for name, value in (("worst_overreach_pct", worst_overreach_pct),
                        ("error_budget_pct", error_budget_pct),
                        ("philosophy_max_pct", philosophy_max_pct),
                        ("margin_pct", margin_pct)):
        if not math.isfinite(value):
            raise InputError("must be a finite number", field=name, value=value)
    if error_budget_pct < 0:
        raise InputError("error budget must not be negative", field="error_budget_pct",
                         value=error_budget_pct)
    if not 0 < philosophy_max_pct <= 100:
        raise InputError("maximum zone 1 reach must be in (0, 100] %",
                         field="philosophy_max_pct", value=philosophy_max_pct)
    if not 0 <= margin_pct < 100:
        raise InputError("margin must be in [0, 100) %", field="margin_pct", value=margin_pct)
    total = error_budget_pct + max(0.0, worst_overreach_pct)
    limit = (100.0 - margin_pct) / (1 + total / 100)
    reach = min(limit, philosophy_max_pct)
    # Round down to 0.5 %; the small tolerance keeps e.g. 84.99999999999999 at 85.
    return max(0.0, math.floor(reach * 2 + 1e-9) / 2)


def tilted_x_reach(target: complex, tilt_rad: float) -> float:
    r"""Reactive reach (where the reactance line crosses the X axis) of a quadrilateral
    whose reactance line, tilted by τ, passes through the target :math:`Z_t` [ohm]:

    .. math:: X_{reach} = \mathrm{Im}\,Z_t + \mathrm{Re}\,Z_t \tan\tau

    Parameters
    ----------
    target : complex
        The impedance the zone just reaches [ohm].
    tilt_rad : float
        Reactance-line tilt τ [rad] (positive: down toward +R).
    """
    return float(target.imag + target.real * math.tan(tilt_rad))


def zone1_target(w: RuleContext) -> tuple[complex, str, list[Check]]:
    i, z1 = w.inputs, w.ph.zone1
    pct = z1.reach_pct
    rule = f"{pct:g} % of the line"
    limit = 100.0 - z1.min_margin_pct
    # Two recommendations may limit zone 1: the reach study's and the fault simulation's
    # at the remote bus; the stricter applies, and the rule says which one it was.
    study_rec = rec = i.recommended_zone1_pct
    over = i.worst_overreach_pct
    basis = "reach study"
    if i.simulated_zone1_pct is not None:
        if rec is None or i.simulated_zone1_pct < rec:
            rec, basis = i.simulated_zone1_pct, "fault simulation"
    over_basis = "reach study"
    if i.simulated_overreach_pct is not None and (
            over is None or i.simulated_overreach_pct > over):
        over, over_basis = i.simulated_overreach_pct, "fault simulation"
    # The recommendation already carries the error budget: below the setting, it rules.
    exceeds = rec is not None and rec < pct
    if over is not None:
        exceeds = exceeds or pct * (1 + over / 100) > limit
    if exceeds and z1.reduce_to_reach_study and rec is not None and rec < pct:
        if study_rec is not None and study_rec < pct:
            further = (f"; the fault simulation limits it further to {rec:g} % "
                       "(zone1_limited_by_simulation)" if basis == "fault simulation" else "")
            w.warn(
                "zone1_reduced_by_reach_study",
                f"Zone 1 reduced from {pct:g} % to the reach study's recommended "
                f"{study_rec:g} % of the line (worst-case overreach plus the error budget "
                f"exceed the margin){further}",
                "check the reach study's assumptions (" + (
                    "the series capacitors in the relay's path, which bring the remote bus "
                    "nearer; " if i.series_xc_in_path_ohm > 0 else "")
                + "transposition, earth resistivity)",
            )
        # (a reduction by the fault simulation alone is warned by the verification:
        # zone1_limited_by_simulation, with the governing overreach)
        rule = f"{rec:g} % of the line ({basis} recommendation; philosophy {pct:g} %)"
        pct = rec
    elif exceeds:
        w.warn(
            "zone1_overreach_exceeds_margin",
            f"Zone 1 at {pct:g} % of the line may overreach past the margin of "
            f"{z1.min_margin_pct:g} % short of the remote bus",
            (f"reduce zone 1 (to the {basis}'s recommended {rec:g} % of the line), or allow "
             "the automatic reduction in the philosophy" if rec is not None else
             "reduce zone 1, or allow the automatic reduction in the philosophy"),
        )
    checks = []
    if over is not None:
        eff = pct * (1 + over / 100)
        checks.append(Check(
            "reach_study_margin", eff <= limit,
            f"worst-case reach {eff:.4g} % of the line (the setting plus {over:.3g} % of it: "
            f"error budget and worst overreach, from the {over_basis}) against the limit "
            f"{limit:g} %",
        ))
    return pct / 100 * i.z1_line_ohm, rule, checks


def compensated_zone1_pct(x_line_ohm: float, x_compensated_ohm: float,
                          error_budget_pct: float, margin_pct: float,
                          philosophy_max_pct: float = 100.0) -> float:
    r"""Zone 1 limit of a series-compensated line [% of the line's Z1].

    Zone 1 must stay short of the remote bus through the compensated line: below the
    reactance of the protected line with every bank in service as seen from the relay
    (:math:`X_{L1} - X_C`, the banks in the relay's measured path). The philosophy's zone 1
    reach p and the margin with the error budget apply to that compensated reactance as
    they apply to an uncompensated line's (common practice, no source; the reactance, which
    a capacitor reduces, decides):

    .. math:: r \le \min\left(p,\ \frac{100 - m}{1 + b/100}\right)
              \frac{X_{L1} - X_C}{X_{L1}}\ [\%]

    rounded down to 0.5 %.

    Parameters
    ----------
    x_line_ohm : float
        Positive-sequence reactance of the protected line [ohm], > 0.
    x_compensated_ohm : float
        That reactance less the banks in the relay's path [ohm].
    error_budget_pct, margin_pct : float
        As :func:`recommended_zone1_pct` [%].
    philosophy_max_pct : float
        The philosophy's zone 1 reach [%], applied to the compensated reactance.
    """
    if not (math.isfinite(x_line_ohm) and x_line_ohm > 0 and math.isfinite(x_compensated_ohm)):
        raise InputError("line reactance must be positive", field="x_line_ohm",
                         value=x_line_ohm)
    share = min(philosophy_max_pct, (100.0 - margin_pct) / (1 + error_budget_pct / 100))
    limit = share * x_compensated_ohm / x_line_ohm
    return max(0.0, math.floor(limit * 2 + 1e-9) / 2)
