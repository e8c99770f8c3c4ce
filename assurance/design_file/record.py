"""The normalised record of a design: ``design.toml`` in the output folder.

The record holds every table of the design file with every key in force, in the file's own
names, defaults and derived values filled in (the planning hazard ratio taken from
``[effect] assumed``, the arm layout a binary endpoint chose, the step of a size range).
Reading it back gives the same design and the same numbers; a test checks this on every
case study.
"""

from __future__ import annotations

from typing import Any

__all__ = ["design_toml", "TABLE_ORDER"]

#: the order tables appear in a written record (the schema's order)
TABLE_ORDER = ("title", "endpoint", "success", "effect", "design_prior", "analysis_prior",
               "sd_prior", "sizes", "targets", "zones", "precision", "monte_carlo")


def design_toml(record: dict[str, Any], *, source: str | None = None) -> str:
    """TOML text of a normalised record (see :attr:`DesignFile.record`).

    Parameters
    ----------
    record
        Tables by name, as :func:`~assurance.design_file.parse_design` records them.
    source
        The file the record was read from, named in the header comment.

    Examples
    --------
    >>> from assurance.design_file import parse_design
    >>> spec = parse_design({"endpoint": {"sd": 10.0},
    ...                      "design_prior": {"family": "normal", "mean": 4.0, "sd": 2.0}},
    ...                     source="trial.toml")
    >>> text = design_toml(spec.record, source="trial.toml")
    >>> 'analysis = "t"' in text and 'alpha = 0.025' in text
    True
    """
    import tomli_w

    from .. import __version__

    ordered = {name: record[name] for name in TABLE_ORDER if name in record}
    ordered.update({k: v for k, v in record.items() if k not in ordered})
    header = (f"# Design as planned, written by assurance {__version__}: every key in force,\n"
              "# defaults filled in. `assurance plan` reads it back to the same numbers.\n")
    if source:
        header += f"# Read from: {_one_line(source)}\n"
    return header + tomli_w.dumps(ordered)


def _one_line(text: str) -> str:
    return "".join(ch if ch.isprintable() else "?" for ch in str(text))
