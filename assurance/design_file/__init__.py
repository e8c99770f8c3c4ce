"""The design file: one schema, the reader, the normalised record and the key reference.

- :mod:`~assurance.design_file.schema` declares every table and key once.
- :mod:`~assurance.design_file.reader` turns a TOML file into a design, reporting every
  problem at once.
- :mod:`~assurance.design_file.record` writes the normalised ``design.toml``.
- :mod:`~assurance.design_file.reference` writes ``docs/design-file.md`` and the JSON
  Schema for editors.

This layer sits above the domain (priors, endpoints, rules): domain modules never import it.
"""

from __future__ import annotations

from .reader import (
    DesignFile,
    endpoint_from_table,
    parse_design,
    prior_from_table,
    prior_with_origin,
    read_design_file,
)

__all__ = ["DesignFile", "read_design_file", "parse_design", "prior_from_table",
           "prior_with_origin", "endpoint_from_table"]
