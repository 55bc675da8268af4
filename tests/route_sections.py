"""A study variant with many transposition sections (a long route with changing towers),
shared by the tests and the benchmarks."""

from __future__ import annotations


def route_sections(data: dict, n: int, *, shunt: bool = True) -> dict:
    """Split the line of a study (TOML tables) into ``n`` sections of alternating lengths
    (80 and 48 units, scaled to the line's length), the phases of every circuit rolled one
    position per section; shunt capacitance on or off. Edits ``data`` and returns it."""
    length_km = float(data["line"]["length"].split()[0])
    unit = data["line"]["length"].split()[1]
    lens = [48.0 if k % 2 else 80.0 for k in range(n)]
    scale = length_km / sum(lens)
    circuits = [(c["name"], list(c["phase_labels"])) for c in data["circuits"]]

    def roll(labels: list[str], k: int) -> list[str]:
        return labels[k % 3:] + labels[:k % 3]

    data["line"]["sections"] = [
        {"length": f"{ln * scale!r} {unit}",
         "order": {name: roll(labels, k) for name, labels in circuits}}
        for k, ln in enumerate(lens)]
    data.setdefault("reach_study", {})["shunt_capacitance"] = shunt
    return data
