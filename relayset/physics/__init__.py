"""Pure computation: no file access, no printing, SI units, numpy arrays.

Each module holds one published model or one step of the calculation. Functions accept
and return plain numbers and numpy arrays (vectorised over leading axes where it matters).
"""
