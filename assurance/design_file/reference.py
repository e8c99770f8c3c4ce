"""Write the key reference page and the JSON Schema of the design file, from the schema.

``python -m assurance.design_file.reference docs`` (or ``make reference``) writes
``docs/design-file.md`` and ``docs/design-file.schema.json``; a test fails when either
differs from what the schema gives, so the page can never drift from the reader.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path
from typing import Any

__all__ = ["json_schema", "reference_markdown", "write_reference"]

SCHEMA_FILE = "design-file.schema.json"
PAGE_FILE = "design-file.md"


def _drop_nulls(node: Any) -> Any:
    """TOML has no null: remove null alternatives and null defaults from a JSON Schema."""
    if isinstance(node, list):
        return [_drop_nulls(v) for v in node]
    if not isinstance(node, dict):
        return node
    out = {k: _drop_nulls(v) for k, v in node.items()}
    for key in ("anyOf", "oneOf"):
        if key in out:
            options = [o for o in out[key] if o != {"type": "null"}]
            if len(options) == 1 and key == "anyOf":
                del out[key]
                out = {**options[0], **out}
            else:
                out[key] = options
    if "default" in out and out["default"] is None:
        del out["default"]
    if isinstance(out.get("title"), str):  # pydantic's class and key names, not for users
        del out["title"]
    return out


def json_schema() -> dict[str, Any]:
    """The JSON Schema of a design file (draft 2020-12), for editors that check TOML.

    Examples
    --------
    >>> schema = json_schema()
    >>> sorted(schema["required"])
    ['design_prior', 'endpoint']
    """
    from .schema import DesignFileModel

    raw = DesignFileModel.model_json_schema(by_alias=True)
    schema = _drop_nulls(raw)
    return {"$schema": "https://json-schema.org/draft/2020-12/schema",
            "title": "assurance design file",
            "description": "A trial design for the assurance package (TOML). Keys, defaults "
                           "and allowed values; see docs/design-file.md.",
            **{k: v for k, v in schema.items() if k not in ("title", "description")}}


# ------------------------------------------------------------------------------------------
# the reference page
# ------------------------------------------------------------------------------------------
def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }" \
            if value else "{ }"
    return f"{value:g}" if isinstance(value, float) else str(value)


def _allowed(prop: dict[str, Any]) -> str:
    if "$ref" in prop:
        return "table (see below)"
    if "const" in prop:
        return _toml_value(prop["const"])
    if "enum" in prop:
        if len(prop["enum"]) > _LONGEST_ENUM:
            return "one of the names listed below the table"
        return ", ".join(_toml_value(v) for v in prop["enum"])
    for key in ("anyOf", "oneOf"):
        if key in prop:
            refs = [o["$ref"] for o in prop[key] if "$ref" in o]
            if refs and len(refs) == len(prop[key]):
                if all(r.endswith("Prior") for r in refs):
                    return "prior table (see [Priors](#priors))"
                return "table (see below)"
            return " or ".join(_allowed(o) for o in prop[key])
    kind = prop.get("type")
    bounds = []
    for key, sign in (("exclusiveMinimum", ">"), ("minimum", ">="), ("exclusiveMaximum", "<"),
                      ("maximum", "<=")):
        if key in prop:
            bounds.append(f"{sign} {_toml_value(prop[key])}")
    bound = (" " + " and ".join(bounds)) if bounds else ""
    if kind == "number":
        return f"number{bound}"
    if kind == "integer":
        return f"whole number{bound}"
    if kind == "boolean":
        return "true or false"
    if kind == "string":
        if prop.get("pattern") == _PLAIN:
            return f"one line of text, at most {prop.get('maxLength')} characters"
        if "maxLength" in prop:
            return f"text, at most {prop['maxLength']} characters"
        return "text"
    if kind == "array":
        item = _allowed(prop.get("items", {})) if prop.get("items") else "values"
        size = ""
        if prop.get("minItems") is not None and prop.get("minItems") == prop.get("maxItems"):
            size = f"{prop['minItems']} "
        elif prop.get("minItems"):
            size = f"at least {prop['minItems']} "
        return f"list of {size}({item})" if size else f"list of ({item})"
    if kind == "object":
        extra = prop.get("additionalProperties")
        if not isinstance(extra, dict) and prop.get("patternProperties"):
            extra = next(iter(prop["patternProperties"].values()))
        if isinstance(extra, dict):
            return f"table of names = ({_allowed(extra)})"
        return "table"
    return "see meaning"


#: choices listed in the table's cell up to this many; longer lists go below the table
_LONGEST_ENUM = 20


def _plain_pattern() -> str:
    from .schema import _PLAIN_PATTERN

    return _PLAIN_PATTERN


_PLAIN = _plain_pattern()

#: tables that are in force with their keys' defaults when the file leaves them out
_WITH_DEFAULTS = {"success", "effect", "targets", "monte_carlo"}


def _rows(model_schema: dict[str, Any]) -> list[str]:
    required = set(model_schema.get("required", []))
    rows = ["| key | default | allowed | read on | meaning |",
            "|---|---|---|---|---|"]
    for name, prop in model_schema.get("properties", {}).items():
        if name in required:
            default = "**required**"
        elif "default" in prop:
            default = f"`{_toml_value(prop['default'])}`"
        elif _allowed(prop) == "table (see below)":
            default = "its keys' defaults" if name in _WITH_DEFAULTS else "none"
        else:
            default = "none"
        meaning = prop.get("description", "").replace("|", "\\|")
        if prop.get("x-applies-to"):
            meaning += f" ({prop['x-applies-to']} only)"
        scale = prop.get("x-scale", "").replace("|", "\\|")
        allowed = _allowed(prop).replace("|", "\\|")
        rows.append(f"| `{name}` | {default} | {allowed} | {scale} | {meaning} |")
    return rows


def reference_markdown() -> str:
    """The key reference page (Markdown), generated from the schema.

    Examples
    --------
    >>> page = reference_markdown()
    >>> "## [endpoint]" in page and "`control_rate`" in page
    True
    """
    from .schema import EFFECT_SCALES

    schema = json_schema()
    defs = schema["$defs"]
    out = [
        "# Design file reference",
        "",
        "<!-- Generated from assurance/design_file/schema.py by `make reference`; a test fails "
        "when this page and the schema differ. Do not edit by hand. -->",
        "",
        "A design file is a [TOML](https://toml.io) file of tables. Only the keys below are "
        "allowed; an unknown key is an error that lists the known keys and names one of close "
        "spelling, if there is one. Numbers must be numbers (`10` or `10.0`, never `\"10\"`) "
        "and finite; flags are `true` or `false`; the title is one line of plain text (no "
        "control characters). The file is UTF-8 text (a leading byte order mark is allowed). "
        "Every problem in a file is reported in one run, each with its table, key, value and "
        "what is allowed (`assurance check FILE`), and a file that passes `check` is not "
        "rejected by `plan` for its inputs.",
        "",
        "The output folder of `assurance plan` keeps a byte-exact copy of the file "
        "(`design_as_given.toml`) and a normalised `design.toml` with every key in force "
        "(defaults filled in); `assurance plan` reads it back to the same numbers.",
        "",
        f"Editors that check TOML against a JSON Schema can use `docs/{SCHEMA_FILE}` (for "
        "example with a first line `#:schema ../../docs/design-file.schema.json` in editors "
        "that read such a line).",
        "",
        "## Scales",
        "",
        "Keys marked *natural effect scale* (in `[effect]`, `[success]`, `[zones]`, elicited "
        "judgements) are read as the endpoint's effect: a difference, or a ratio for ratio "
        "endpoints. Keys marked *prior scale* (the parameters of an effect prior, precision "
        "lengths) are read where the prior lives: the same difference, or the log of the "
        "ratio.",
        "",
        "| endpoint | natural effect scale; prior scale |",
        "|---|---|",
        *[f"| `{kind}` | {text} |" for kind, text in EFFECT_SCALES.items()],
        "",
        "A non-inferiority `margin` is a positive number: a difference, or for ratio endpoints "
        "a ratio (say 1.3 for a hazard ratio when lower is better). Reading a design warns "
        "when `effect.assumed` or `effect.relevant` lies on the harmful side of no effect "
        "(or beyond the margin).",
        "",
        "## Top level",
        "",
        *_rows(schema),
        "",
        "## [endpoint]",
        "",
        "`type` chooses the endpoint (default `\"continuous\"`); each type has its own keys.",
        "",
    ]
    for kind, name in (("continuous", "ContinuousTable"), ("binary", "BinaryTable"),
                       ("time_to_event", "TimeToEventTable"), ("counts", "CountsTable")):
        out += [f"### type = \"{kind}\"", "", defs[name].get("description", ""), "",
                *_rows(defs[name]), ""]
    out += ["### type = \"model\"", "",
            "An analysis model fitted to simulated trials (PyMC): `model` chooses it. The "
            "effect's design prior is `[design_prior]` (on the model's effect scale: a "
            "difference, or a log odds ratio for `logistic`) and its assumed value "
            "`[effect] assumed`; `[sizes]` must list the sizes; `[simulation]` sets the "
            "trials. Keys ending in `_prior` take a prior table (`{ family = \"uniform\", "
            "lower = 0.3, upper = 0.7 }`) or a number (a fixed value).", ""]
    for kind, name in (("ancova", "AncovaTable"), ("logistic", "LogisticTable"),
                       ("hierarchical_regions", "RegionsTable"),
                       ("borrowed_control", "BorrowedControlTable")):
        out += [f"#### model = \"{kind}\"", "", defs[name].get("description", ""), "",
                *_rows(defs[name]), ""]
    out += ["## [success]", "", "`rule` chooses the success rule (default "
            "`\"significance\"`).", ""]
    for kind, name in (("significance", "SignificanceTable"),
                       ("posterior_probability", "PosteriorProbabilityTable")):
        out += [f"### rule = \"{kind}\"", "", defs[name].get("description", ""), "",
                *_rows(defs[name]), ""]
    for table, name in (("effect", "EffectTable"), ("sizes", "SizesTable"),
                        ("targets", "TargetsTable"), ("zones", "ZonesTable"),
                        ("precision", "PrecisionTable"), ("sensitivity", "SensitivityTable"),
                        ("monte_carlo", "MonteCarloTable"), ("simulation", "SimulationTable")):
        out += [f"## [{table}]", "", defs[name].get("description", ""), "",
                *_rows(defs[name]), ""]
    out += [
        "## Priors",
        "",
        "`[design_prior]`, `[analysis_prior]`, `[sd_prior]`, `[endpoint.median_prior]` and "
        "`[endpoint.control_rate_prior]` are prior tables; `family` chooses the family. "
        "`log_normal` gives an effect prior for ratio endpoints (a median ratio and the SD of "
        "the log ratio) and, for `median_prior` or `control_rate_prior`, a log-normal "
        "distribution of that positive quantity. `beta_rates` is for binary endpoints. "
        "A `mixture` lists its parts as inline tables, each a simple family with a `weight`.",
        "",
    ]
    prior_defs = [(n, d) for n, d in defs.items() if n.endswith("Prior")]
    for name, d in prior_defs:
        family = d["properties"]["family"].get("const", name)
        out += [f"### family = \"{family}\"", "", d.get("description", ""), "",
                *_rows(d), ""]
        for key, prop in d["properties"].items():
            if len(prop.get("enum", [])) > _LONGEST_ENUM:
                names = ", ".join(f"`{v}`" for v in prop["enum"])
                out += [f"Allowed `{key}` values: {names}.", ""]
    return "\n".join(out).rstrip() + "\n"


def write_reference(folder: str | Path) -> list[Path]:
    """Write the reference page and the JSON Schema into ``folder``; returns the paths."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    page = folder / PAGE_FILE
    page.write_text(reference_markdown(), encoding="utf-8")
    schema = folder / SCHEMA_FILE
    schema.write_text(json.dumps(json_schema(), indent=2, sort_keys=False) + "\n",
                      encoding="utf-8")
    return [page, schema]


if __name__ == "__main__":  # pragma: no cover - used by `make reference`
    for path in write_reference(sys.argv[1] if len(sys.argv) > 1 else "docs"):
        print(f"wrote {path}")
