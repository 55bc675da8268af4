"""The relayset version, in one place: the build reads it (``[tool.hatch.version]`` in
pyproject.toml) and so does every process, without importlib.metadata, which alone costs
about 30 ms of start-up."""

__version__ = "0.4.0"


def relayset_version() -> str:
    """The relayset version (the one the installed distribution was built with)."""
    return __version__
