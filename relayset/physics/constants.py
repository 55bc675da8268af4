"""Physical constants (SI)."""

from __future__ import annotations

import math

#: Magnetic constant [H/m]. The 2019 SI value differs from 4π·1e-7 by about 1e-10 relative;
#: line-parameter practice and the published test cases use 4π·1e-7, so we do too.
MU0_H_PER_M: float = 4e-7 * math.pi

#: Electric constant [F/m] (CODATA 2018).
EPS0_F_PER_M: float = 8.8541878128e-12

#: Euler-Mascheroni constant, used by Carson's series.
EULER_GAMMA: float = 0.57721566490153286
