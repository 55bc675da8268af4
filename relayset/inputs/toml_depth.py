"""How deep a TOML text nests, found on the raw text before the TOML reader sees it.

Python's TOML reader recurses once per bracket (a few hundred ``[`` raise RecursionError)
and keeps every prefix of a dotted key (``a.a.a... = 1`` with n parts costs memory growing
with n squared: 7.9 GB for one 200 KB line). This scan reads the text once, token by token
(strings and comments skipped whole by regular expressions), and stops at the first place
deeper than the limit. It only measures: whatever it reads wrongly in a broken file, the
TOML reader refuses afterwards.
"""

from __future__ import annotations

import re

# One token: a string of any of the four kinds (unterminated ones run to the end of the
# line; the TOML reader will refuse them), a comment, a newline, one punctuation mark, or
# a run of anything else.
_TOKEN = re.compile(r'''
    """(?:[^"\\]|\\[\s\S]|"(?!""))*(?:"""|$)"{0,2}
  | \'\'\'[\s\S]*?(?:\'\'\'|$)'{0,2}
  | "(?:[^"\\\n]|\\.)*"?
  | '[^'\n]*'?
  | \#[^\n]*
  | [\n\[\]{}=,.]
  | [^"'\#\n\[\]{}=,.]+
''', re.VERBOSE)


def nesting_depth(text: str, limit: int) -> tuple[int, int, str] | None:
    """The first place where ``text`` nests more than ``limit`` levels deep, or None.

    Returns
    -------
    (depth, line, key) or None
        The depth reached (levels of tables, lists and dotted-key parts from the top), the
        line number (1-based) and the key being written there, as in the file.
    """
    line = 1
    key = ""  # the key (or table header) being read, as written
    parts = 1  # dotted-key parts read so far in key mode
    header = 0  # depth of the current [table] or [[array]] (top-level keys start there)
    stack: list[tuple[str, int]] = []  # open "[" (value lists) and "{" with their depth
    mode = "key"  # "key", "value" or "header"
    header_open = 0  # "[" that opened the header (1 or 2)
    value_depth = 0  # depth of the value after the last "="
    for m in _TOKEN.finditer(text):
        tok = m.group()
        c = tok[0]
        if c == "\n":
            line += 1
            if not stack:
                mode, key, parts = "key", "", 1
            continue
        if c == "#":
            continue
        if c in "\"'":
            line += tok.count("\n")
            if mode in ("key", "header"):
                key += tok
            continue
        if mode == "header":
            if c == ".":
                parts += 1
                key += "."
                if parts > limit:
                    return parts, line, key.strip()
            elif c == "]":
                header = parts + (1 if header_open == 2 else 0)
                mode = "after"
            elif c != "[":
                key += tok
            continue
        if mode == "after":  # the rest of a header line: the TOML reader checks it
            continue
        if mode == "key":
            if c == "[" and not stack and not key.strip():
                mode, key, parts, header_open = "header", "", 1, 1
                if text.startswith("[[", m.start()):
                    header_open = 2
                continue
            if c == ".":
                parts += 1
                key += "."
            elif c == "=":
                base = stack[-1][1] if stack else header
                depth = base + parts
                if depth > limit:
                    return depth, line, key.strip()
                mode = "value"
                value_depth = depth
                continue
            elif c == "}" and stack and stack[-1][0] == "{":  # an empty inline table
                stack.pop()
                mode = "value"
            elif c not in ",":
                key += tok
            if parts > limit:
                return parts, line, key.strip()
            continue
        # value mode
        if c == "[":
            depth = (stack[-1][1] + 1) if stack and stack[-1][0] == "[" else value_depth
            stack.append(("[", depth))
            if depth + 1 > limit:
                return depth + 1, line, key.strip()
        elif c == "{":
            depth = (stack[-1][1] + 1) if stack and stack[-1][0] == "[" else value_depth
            stack.append(("{", depth))
            mode, key, parts = "key", "", 1
        elif c in "]}":
            if stack:
                stack.pop()
        elif c == "," and stack and stack[-1][0] == "{":
            mode, key, parts = "key", "", 1
    return None
