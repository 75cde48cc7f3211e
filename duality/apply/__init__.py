"""Stage 4, apply: the duals put to work.

Scenario files (``scenario``), price changes and welfare (``welfare``), evaluation on tables
and files (``evaluate``), estimation of the derived equations (``estimation``) and exports as
code, LaTeX and JSON (``export``).  Imports the earlier stages only; the command line and the
app sit on top.
"""
