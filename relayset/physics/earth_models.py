"""The names of the earth-return models and what each is (no numerical imports: the
``earth-models`` command lists them without loading the engine)."""

EARTH_MODELS: dict[str, str] = {
    "carson": "Carson's full series, asymptotic form for large Carson parameter (default)",
    "carson_truncated": "Carson's series truncated to P = pi/8, Q = -0.0386 + ln(2/r)/2 "
    "(reproduces distribution test feeder tables)",
    "deri": "Deri's complex-depth image plane (closed form, within a few percent of Carson)",
    "two_layer": "Carson's integral over an upper layer (earth_resistivity, "
    "earth_layer_thickness) on a lower half-space (earth_lower_resistivity), integrated",
}
