"""Study orchestration: from a validated study file to results objects (no printing)."""
