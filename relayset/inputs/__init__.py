"""Inputs parsed and validated at the edge: study file, philosophy, conductors, units."""
