"""Collect every problem of a design file and say each in the file's own words.

A problem names its key as the file writes it (``'endpoint.sd'``,
``'design_prior.parts[1].weight'``), says what is allowed, and shows the value given. The
schema's messages (pydantic's) and the package's own parameter checks (which speak of
Python parameters such as ``sigma``) are both rephrased here.
"""

from __future__ import annotations

import difflib
import re
import types
import typing
from typing import Any

from ..errors import AssuranceInputError, DesignFileError

__all__ = ["Problems", "did_you_mean"]


#: keys written as other software or textbooks write them -> this file's key
_SYNONYMS = {"loc": "location", "mu": "mean", "sigma": "sd", "std": "sd", "stdev": "sd",
             "sd_log": "log_sd", "min": "lower", "max": "upper"}


def _needed_similarity(a: str, b: str, cutoff: float) -> float:
    """Short words need a closer match: 'df' is not a misspelling of 'sd'."""
    shorter = min(len(a), len(b))
    if shorter <= 3:
        return max(cutoff, 0.8)
    if shorter <= 5:
        return max(cutoff, 0.75)
    return cutoff


def did_you_mean(value: Any, options: Any, cutoff: float = 0.6) -> str:
    """`` Did you mean 'x'?`` for a close spelling of an option, or an empty string.

    Only a spelling close enough to mean the same is suggested: short words need a closer
    match (``df`` is not suggested as ``sd``, nor ``scale`` as ``shape``); a few common
    other names are recognised (``loc`` for ``location``).

    Examples
    --------
    >>> did_you_mean("normel", ["normal", "uniform"])
    " Did you mean 'normal'?"
    >>> did_you_mean("df", ["family", "mean", "sd"])
    ''
    """
    word = str(value)
    names = [str(o) for o in options]
    if not names or len(word) > 3 * max(len(n) for n in names) + 10:
        return ""  # far too long to be a misspelling (and slow to compare)
    if _SYNONYMS.get(word) in names:
        return f" Did you mean {_SYNONYMS[word]!r}?"
    best, best_ratio = None, 0.0
    for name in names:
        ratio = difflib.SequenceMatcher(None, word, name).ratio()
        if ratio >= _needed_similarity(word, name, cutoff) and ratio > best_ratio:
            best, best_ratio = name, ratio
    return f" Did you mean {best!r}?" if best is not None else ""


def shown_key(key: Any) -> str:
    """A key as the file wrote it, quoted and escaped, shortened when long."""
    text = repr(str(key))
    return text if len(text) <= 42 else text[:38] + "...'"


def printable(text: str) -> str:
    """``text`` with control characters escaped (for file names in messages)."""
    return "".join(ch if ch.isprintable() or ch == " " else ascii(ch)[1:-1] for ch in text)


#: Python parameter names -> design-file keys, where they differ
_PARAMETER_KEYS = {"sigma": "sd", "loc": "location"}

#: Python names in the package's messages -> what a design file says (longest first)
_FILE_WORDS = [
    ("a design with a BinaryEndpoint and a PosteriorProbability rule",
     'a binary endpoint with rule = "posterior_probability"'),
    ("a design with a BinaryEndpoint", "a binary endpoint"),
    ("with a BinaryEndpoint", "with a binary endpoint"),
    ("BinaryEndpoint(control_prior=...)", "'endpoint.control_prior'"),
    ("a Significance rule", 'rule = "significance"'),
    ("a PosteriorProbability rule", 'rule = "posterior_probability"'),
    ("a BetaRates design prior", 'a design prior with family = "beta_rates"'),
    ("a BetaRates prior", 'a prior with family = "beta_rates"'),
    ("BetaRates", '"beta_rates"'),
    ("must be None (flat), a Normal, or a Mixture of Normal and PointMass parts",
     'must be left out (flat), family = "normal", or a "mixture" of "normal" and '
     '"point_mass" parts'),
    ("must be None", "must be left out"),
]

_TYPE_WORDS = {
    "float_type": "a number",
    "float_parsing": "a number",
    "int_type": "a whole number",
    "int_parsing": "a whole number",
    "int_from_float": "a whole number",
    "bool_type": "true or false",
    "bool_parsing": "true or false",
    "string_type": "text in quotes",
    "list_type": "a list [ ... ]",
    "dict_type": "a table",
    "model_type": "a table",
    "model_attributes_type": "a table",
    "finite_number": "a finite number",
}


def _path(parts: tuple[Any, ...]) -> str:
    text = ""
    for part in parts:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += ("." if text else "") + str(part)
    return text


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _models_in(annotation: Any) -> list[Any]:
    """The table models an annotation can hold (through Optional, Annotated, list, Union)."""
    from pydantic import BaseModel

    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        return _models_in(typing.get_args(annotation)[0])
    if origin in (typing.Union, types.UnionType, list):
        return [m for arg in typing.get_args(annotation) for m in _models_in(arg)]
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return [annotation]
    return []


def _model_at(loc: tuple[Any, ...]) -> Any:
    """The table model at ``loc`` (a pydantic error location with tags), or None."""
    from .schema import TAGGED, DesignFileModel

    model: Any = DesignFileModel
    candidates: list[Any] = [model]
    for part in loc:
        if isinstance(part, int):
            continue
        if ":" in str(part):
            model = TAGGED.get(str(part))
            candidates = [model] if model is not None else []
            continue
        found = None
        for candidate in candidates:
            if candidate is None:
                continue
            fields = {f.alias or name: f for name, f in candidate.model_fields.items()}
            if part in fields:
                found = fields[part]
                break
        if found is None:
            return None
        candidates = _models_in(found.annotation)
        model = candidates[0] if len(candidates) == 1 else None
    return model


def _field(model: Any, key: str) -> Any:
    if model is None:
        return None
    for name, f in model.model_fields.items():
        if (f.alias or name) == key:
            return f
    return None


class Problems:
    """Problems found in one design file, reported together."""

    def __init__(self, source: str):
        self.source = printable(str(source))
        self.items: list[str] = []

    def __bool__(self) -> bool:
        return bool(self.items)

    def add(self, where: str, text: str) -> None:
        """One problem; ``where`` (a table) is named unless the text names its key already."""
        text = text.strip()
        if where and not text.startswith(("'", "[")):
            text = f"[{where}] {text}"
        if text not in self.items:
            self.items.append(text)

    def add_domain(self, exc: AssuranceInputError, where: str,
                   keys: dict[str, str] | None = None, note: str = "") -> None:
        """A package input error, its Python parameter named as the file's key."""
        def key(match: re.Match[str]) -> str:
            name = match.group(1)
            if keys and name in keys:
                return f"'{keys[name]}'"
            name = _PARAMETER_KEYS.get(name, name)
            return f"'{where}.{name}'" if where else f"'{name}'"

        text = re.sub(r"The '([\w.]+)' parameter of \w+", key, str(exc))
        for python, file_words in _FILE_WORDS:
            text = text.replace(python, file_words)
        text = re.sub(r"\bGot (.*) instead\.$", r"Got \1.", text)
        self.add(where, text + note)

    def add_validation(self, exc: Any, prefix: tuple[Any, ...] = (), raw: Any = None) -> None:
        """The schema's findings (a pydantic ``ValidationError``), rephrased.

        ``raw`` is the value validated (the table as the file wrote it), which lets a
        suggestion leave out keys the table already has.
        """
        for err in exc.errors(include_url=False):
            loc = tuple(prefix) + tuple(err["loc"])
            shown = tuple(p for p in loc if not (isinstance(p, str) and ":" in p))
            table = _table_at(raw, shown[len(prefix):-1]) if raw is not None else None
            self.add("", self._say(err, loc, shown, table))

    def _say(self, err: dict[str, Any], loc: tuple[Any, ...], shown: tuple[Any, ...],
             table: dict[str, Any] | None = None) -> str:
        kind, ctx, value = err["type"], err.get("ctx") or {}, err.get("input")
        path = _path(shown)
        if kind == "extra_forbidden":
            return _unknown_key(loc, shown, table)
        if kind == "missing":
            f = _field(_model_at(loc[:-1]), str(shown[-1]))
            why = f" ({f.description.rstrip('.')})" if f is not None and f.description else ""
            return f"'{path}' is required{why}."
        if kind in ("union_tag_invalid", "union_tag_not_found"):
            tags = re.findall(r"'(\w+):(\w+)'", str(ctx.get("expected_tags", "")))
            if not tags:
                from .schema import TAGGED

                prefix = str(ctx.get("tag", "")).split(":")[0]
                tags = [tuple(t.split(":")) for t in TAGGED if t.startswith(prefix + ":")]
            if isinstance(value, dict) and value.get("type") == "model":
                # an analysis model: the model's name chooses the table
                tags = [tuple(t.split(":")) for t in _tagged() if t.startswith("model:")]
                field = "model"
            else:
                tags = [t for t in tags if t[0] != "model"] or tags
                field = {"prior": "family", "part": "family", "endpoint": "type",
                         "rule": "rule"}.get(tags[0][0] if tags else "", "family")
            names = [name for _, name in tags]
            if field == "type":
                names.append("model")
            given = value.get(field) if isinstance(value, dict) else None
            if not isinstance(value, dict):
                return f"'{path}' must be a table. Got {_shown(value)}."
            if given is None:
                return f"'{path}.{field}' is required; choose one of {', '.join(names)}."
            return (f"'{path}.{field}' must be one of {', '.join(names)}. Got "
                    f"{_shown(given)}.{did_you_mean(given, names)}")
        if kind == "literal_error":
            return f"'{path}' must be one of {ctx.get('expected', '')}. Got {_shown(value)}." \
                + did_you_mean(value, re.findall(r"'([^']*)'", str(ctx.get("expected", ""))))
        bounds = {"greater_than": "> {gt}", "greater_than_equal": ">= {ge}",
                  "less_than": "< {lt}", "less_than_equal": "<= {le}"}
        if kind in bounds:
            f = _field(_model_at(loc[:-1]), str(shown[-1]))
            allowed = _range_text(f) or bounds[kind].format(**{k: _num(v)
                                                              for k, v in ctx.items()})
            what = "a whole number" if isinstance(value, int) and not isinstance(
                value, bool) and kind.startswith(("greater", "less")) and _is_int_field(
                _model_at(loc[:-1]), str(shown[-1])) else "a number"
            return f"'{path}' must be {what} {allowed}. Got {_shown(value)}."
        if kind == "string_too_long":
            size = len(value) if isinstance(value, str) else "more"
            return (f"'{path}' must be at most {ctx.get('max_length')} characters. Got "
                    f"{size:,} characters, starting {_shown(value)[:40]}...'.")
        if kind == "string_too_short":
            return f"'{path}' must not be empty. Got {_shown(value)}."
        if kind == "string_pattern_mismatch":
            if str(shown[-1]) == "[key]":
                return (f"'{_path(shown[:-2])}' has a key that is not a name (letters, digits "
                        f"and underscores, starting with a letter). Got {shown_key(shown[-2])}.")
            return (f"'{path}' must be a name (letters, digits and underscores, starting with "
                    f"a letter). Got {_shown(value)}.")
        if kind == "too_short":
            return (f"'{path}' must have at least {ctx.get('min_length')} "
                    f"entr{'y' if ctx.get('min_length') == 1 else 'ies'}. Got {_shown(value)}.")
        if kind == "too_long":
            return (f"'{path}' must have at most {ctx.get('max_length')} entries. Got "
                    f"{_shown(value)}.")
        if kind in _TYPE_WORDS:
            return f"'{path}' must be {_TYPE_WORDS[kind]}. Got {_shown(value)}."
        if kind == "value_error":
            text = str(ctx.get("error", err["msg"]))
            target = f"'{path}'" if path else "the design"
            if isinstance(value, dict):
                return f"[{path}] {text}." if path else f"{text}."
            return f"{target} {text}."
        return f"'{path}': {err['msg']}. Got {_shown(value)}."

    def raise_if_any(self) -> None:
        """Raise one :class:`DesignFileError` listing every problem, if there are any."""
        if not self.items:
            return
        if len(self.items) == 1:
            message = f"{self.source}: {self.items[0]}"
        else:
            lines = "\n".join(f"  {i}. {p}" for i, p in enumerate(self.items, 1))
            message = f"{self.source}: {len(self.items)} problems:\n{lines}"
        error = DesignFileError(message)
        error.problems = list(self.items)  # type: ignore[attr-defined]
        raise error


def _table_at(raw: Any, where: tuple[Any, ...]) -> dict[str, Any] | None:
    """The table (mapping) at ``where`` inside ``raw``, or None."""
    node = raw
    for part in where:
        if isinstance(part, int) and isinstance(node, list) and 0 <= part < len(node):
            node = node[part]
        elif isinstance(node, dict) and part in node:
            node = node[part]
        else:
            return None
    return node if isinstance(node, dict) else None


def _unknown_key(loc: tuple[Any, ...], shown: tuple[Any, ...],
                 table: dict[str, Any] | None) -> str:
    """An unknown key: where, a close spelling if there is one, the tables it belongs to."""
    from .schema import TAGGED, MixturePrior

    model = _model_at(loc[:-1])
    known = [] if model is None else [f.alias or n for n, f in model.model_fields.items()]
    name = str(shown[-1])
    where = _path(shown[:-1])
    place = f"[{where}]" if where else "the top level"
    hint = did_you_mean(name, known, cutoff=0.5)
    close = re.findall(r"'([^']*)'\?$", hint)
    if close and close[0] in (table or {}):
        hint += f" ({close[0]!r} is given too: keep one.)"
    tag = next((str(p) for p in reversed(loc[:-1]) if isinstance(p, str) and ":" in p), "")
    if model is MixturePrior and name in ("weight", "weights"):
        hint += (" Each part carries its own 'weight': parts = [{ family = \"normal\", mean "
                 "= 3.0, sd = 1.5, weight = 0.8 }, { family = \"point_mass\", value = 0.0, "
                 "weight = 0.2 }].")
    elif tag and not hint:
        kind, _, own = tag.partition(":")
        field = {"endpoint": "type", "rule": "rule"}.get(kind, "family")
        others = [t.partition(":")[2] for t, m in TAGGED.items()
                  if t.startswith(kind + ":") and t != tag and name in {
                      f.alias or n for n, f in m.model_fields.items()}]
        if others:
            listed = " or ".join(", ".join(f'"{o}"' for o in others).rsplit(", ", 1))
            hint = (f" {shown_key(name)} belongs to {field} = {listed}, not to {field} = "
                    f'"{own}".')
    listing = f" Known keys: {', '.join(known)}." if known else ""
    return f"unknown key {shown_key(name)} in {place}.{hint}{listing}"


def _is_int_field(model: Any, key: str) -> bool:
    """Whether ``key`` of ``model`` holds whole numbers (or lists of them)."""
    f = _field(model, key)
    if f is None:  # a list entry: its field is the list
        return True
    text = str(f.annotation)
    return "int" in text and "float" not in text


def _num(value: Any) -> str:
    return f"{float(value):g}" if isinstance(value, int | float) else str(value)


def _constraints(annotation: Any) -> list[Any]:
    """The annotated-types constraints inside an annotation (through Optional, Annotated)."""
    found: list[Any] = []
    origin = typing.get_origin(annotation)
    if origin is typing.Annotated:
        for meta in typing.get_args(annotation)[1:]:
            found += list(getattr(meta, "metadata", [meta]))
    elif origin in (typing.Union, types.UnionType):
        for arg in typing.get_args(annotation):
            found += _constraints(arg)
    return found


def _range_text(f: Any) -> str:
    """'> 0 and < 1' from a field's constraints, or ''."""
    if f is None:
        return ""
    parts = []
    for meta in [*f.metadata, *_constraints(f.annotation)]:
        for attr, sign in (("gt", ">"), ("ge", ">="), ("lt", "<"), ("le", "<=")):
            bound = getattr(meta, attr, None)
            if bound is not None:
                parts.append(f"{sign} {_num(bound)}")
    return " and ".join(dict.fromkeys(parts))


def _tagged() -> dict[str, Any]:
    from .schema import TAGGED

    return TAGGED
