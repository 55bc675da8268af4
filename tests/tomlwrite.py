"""Minimal TOML writer for test variants of the demo studies."""

from __future__ import annotations


def dump_toml(data: dict) -> str:
    """Minimal TOML writer for test variants (tables, arrays of tables, scalars, inline)."""

    def val(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, str):
            return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
        if isinstance(v, int | float):
            return repr(v)
        if isinstance(v, list | tuple):
            return "[" + ", ".join(val(x) for x in v) + "]"
        if isinstance(v, dict):
            return "{ " + ", ".join(f'"{k}" = {val(x)}' for k, x in v.items()) + " }"
        if hasattr(v, "isoformat"):
            return v.isoformat()
        raise TypeError(type(v))

    lines: list[str] = []

    def table(prefix: str, d: dict):
        scalars = {k: v for k, v in d.items()
                   if not isinstance(v, dict) and not (isinstance(v, list) and v
                                                       and all(isinstance(x, dict) for x in v))}
        if prefix:
            lines.append(f"[{prefix}]")
        for k, v in scalars.items():
            lines.append(f'"{k}" = {val(v)}')
        for k, v in d.items():
            name = f'{prefix}."{k}"' if prefix else f'"{k}"'
            if isinstance(v, dict):
                table(name, v)
            elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
                for item in v:
                    lines.append(f"[[{name}]]")
                    for kk, vv in item.items():
                        lines.append(f'"{kk}" = {val(vv)}')

    table("", data)
    return "\n".join(lines) + "\n"
