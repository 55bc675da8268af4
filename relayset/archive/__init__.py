"""Archived reports: verify an archived PDF against its embedded files and a recomputation
(``verify``), and compare two revisions of a line (``compare``)."""
