# %% [markdown]
# # relayset from Python: a tour
#
# Three jobs an engineer does from a notebook, on the invented demo lines shipped with
# relayset. Run it as a script (`python docs/examples/python_api_tour.py`) or open it as a
# notebook (it is in the "percent" format that Jupyter's jupytext and most editors read).
# The test suite runs it (tests/test_docs.py), so it cannot rot.
#
# Every result here still has to be reviewed and approved by a licensed professional
# engineer before it is used.

# %%
import io
import tempfile

import pandas as pd

import relayset
from relayset.resources import demo_lines_dir

DEMOS = demo_lines_dir()
study = relayset.Study.from_file(DEMOS / "ashcombe_brenwick_132kv.toml")
print(study.name, study.sha256[:12])

# %% [markdown]
# ## 1. Earth-resistivity sweep, in memory
#
# `Study.replace` returns a new, validated study: the same checks as a study file, nothing
# written to disk. The demo states a resistivity range, which must contain the value, so
# the sweep drops it first (`None` removes a key).

# %%
base = study.replace("system.earth_resistivity_range", None)
rows = []
for rho in [10, 20, 50, 100, 200, 500, 1000, 2000, 5000]:
    res = relayset.study_parameters(base.replace("system.earth_resistivity", f"{rho} ohm*m"))
    row = res.parameters.to_frame().iloc[0]  # circuit 1, the JSON's names and units
    rows.append({"earth_resistivity_ohm_m": rho, "z1_ohm_per_km": row["z1_ohm_per_km"],
                 "z0_ohm_per_km": row["z0_ohm_per_km"], "k0_magnitude": abs(row["k0.k0"])})
sweep = pd.DataFrame(rows).set_index("earth_resistivity_ohm_m")
print(sweep.to_string())

# %% [markdown]
# A value the study file would refuse is refused here too, with the command line's message:

# %%
try:
    base.replace("system.earth_resistivity", "-5 ohm*m")
except relayset.StudyError as err:
    print(err)
    print("field:", err.field, "| value:", err.value, "| rule:", err.rule)

# %% [markdown]
# ## 2. Comparing transposition plans
#
# The same line with other plans: untransposed, the built plan, and a complete cycle of
# three equal sections. The reach study's worst bolted overreach at the remote bus (what
# zone 1 must stay short of) is read for each plan as built (`actual_plan`).

# %%
plans = {
    "untransposed": [{"length": "80 km", "order": ["A", "B", "C"]}],
    "as built (24/24/32 km)": study.tables["line"]["sections"],
    "two sections (40/40 km)": [{"length": "40 km", "order": ["A", "B", "C"]},
                                {"length": "40 km", "order": ["C", "A", "B"]}],
    "ideal cycle (3 x 80/3 km)": [{"length": f"{80 / 3} km", "order": o}
                                  for o in (["A", "B", "C"], ["C", "A", "B"],
                                            ["B", "C", "A"])],
}
rows = []
for name, sections in plans.items():
    res = relayset.study_reach(study.replace("line.sections", sections))
    worst = res.frames()["worst_cases"]
    plan = worst[(worst["arrangement"] == "actual_plan")
                 & (worst["extreme"] == "worst_overreach_at_remote_bus")]
    end = res.reach_study.ends[0]
    rows.append({"plan": name,
                 "worst_overreach_at_remote_bus_pct": plan["error_pct"].max(),
                 "governing_loop": plan.loc[plan["error_pct"].idxmax(), "loop"],
                 "recommended_zone1_pct": end.recommended_zone1_pct})
plans_table = pd.DataFrame(rows).set_index("plan").round(3)
print(plans_table.to_string())

# %% [markdown]
# ## 3. A fleet's register in pandas
#
# `relayset batch` (here through `relayset.fleet.batch.run_batch`, without the PDF
# reports) computes every demo line and writes a register of results, one row per relay
# end; pandas reads it like any CSV.

# %%
from relayset.fleet.batch import run_batch  # noqa: E402

with tempfile.TemporaryDirectory() as out:
    run_batch(DEMOS, out, workers=1, report=False, stream=io.StringIO())
    register = pd.read_csv(f"{out}/register.csv", encoding="utf-8-sig")
columns = ["line_id", "end", "zone1_primary_ohm", "zone1_secondary_ohm", "verification",
           "failed_checks"]
print(register[columns].to_string(index=False))
print(register.groupby("verification")["line_id"].nunique())
