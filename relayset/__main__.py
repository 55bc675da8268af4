"""``python -m relayset``: the command line (relayset.cli)."""

from relayset.cli import main

if __name__ == "__main__":  # importing the module (e.g. walking the package) runs nothing
    raise SystemExit(main())
