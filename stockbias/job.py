"""The design job (TOML): one stage or a board of several stages (DESIGN §3).

A job says what must hold, not how: supply and its tolerance, the ambient
range, the collector-current window, headroom, limits, the build quantity
and what the search may use.  Values may be numbers or engineering-notation
strings (``"1.5 mA"``, ``"12 V"``).  Unknown sections and keys are errors
(a typo must never silently drop a requirement), and every error names the
file, the line, the key and the offending text; a value outside its plausible
range (:mod:`stockbias.job_ranges`) too.  The dataclasses a job is read into
live in :mod:`stockbias.job_model` and are importable from here.
"""

from __future__ import annotations

import contextlib
import difflib
import math
import re
import tomllib
from pathlib import Path
from typing import Any

from .errors import JobError, NotationError
from .job_model import (
    DEFAULT_OBJECTIVES,
    MODELS,
    OBJECTIVES,
    TOPOLOGY_NAMES,
    Build,
    Environment,
    Job,
    KeepPurpose,
    Limits,
    Search,
    SmallSignal,
    Stage,
    Supply,
    Target,
)
from .job_ranges import implausible
from .units import parse_quantity

__all__ = [
    "MODELS",
    "OBJECTIVES",
    "TOPOLOGY_NAMES",
    "Build",
    "Environment",
    "Job",
    "KeepPurpose",
    "Limits",
    "Search",
    "SmallSignal",
    "Stage",
    "Supply",
    "Target",
    "load_job",
    "parse_job",
    "stage_key_error",
]

# --- parsing -----------------------------------------------------------------

# key -> unit for parse_quantity; None: not a quantity (validated separately)
_SECTIONS: dict[str, dict[str, str | None]] = {
    "supply": {"volts": "V", "tolerance_pct": "%", "negative_volts": "V",
               "negative_tolerance_pct": "%", "mains_derived": None},
    "target": {"ic": "A", "ic_window_pct": "%", "ic_min": "A", "ic_max": "A", "vce_min": "V",
               "swing_pk": "V", "gain_min": "", "gain_max": "", "yield_min": "%",
               "yield_confidence": "%",
               "rin_min": "ohm", "divider_ratio_min": ""},
    "limits": {"supply_power_max": "W", "resistor_derating": "", "tj_max": "°C",
               "derating_knee_c": "°C", "derating_zero_c": "°C", "supply_current_max": "A"},
    "environment": {"ambient_min_c": "°C", "ambient_max_c": "°C"},
    "small_signal": {"load": "ohm", "re_bypassed": None},
    "build": {"quantity": "", "allow_pairs": None, "default_tolerance_pct": "%"},
    "search": {"topology": None, "model": None, "objectives": None, "top": "", "time_limit_s": "s",
               "seed": ""},
    # how far consolidate and substitute may move an existing stage's purpose (% of today's)
    "keep_purpose": {"gain_pct": "%", "rin_pct": "%", "swing_pct": "%",
                     "supply_current_pct": "%"},
}
_STAGE_KEYS = {"name", "topology", "transistor", "target", "limits", "values", "keep_purpose",
               "refs"}
#: how a board written from a netlist marks an entry the user must fill in
FILL_IN = "fill in"
#: (lowest, highest) % per keep_purpose key; gain_pct is a ± band around today's gain
_KEEP_RANGES = {"gain_pct": (0.0, 100.0), "rin_pct": (0.0, 100.0), "swing_pct": (0.0, 100.0),
                "supply_current_pct": (100.0, 1000.0)}


class _Locator:
    """Find the line of a key in the TOML text (tomllib keeps no positions)."""

    _header = re.compile(r"^\s*\[\[?\s*([A-Za-z0-9_.\s]+?)\s*\]\]?")

    def __init__(self, text: str) -> None:
        self.lines = text.splitlines()

    def line_of(self, section: str, key: str | None = None, occurrence: int = 0) -> int | None:
        current, seen, header_line = "", -1, None
        for number, raw in enumerate(self.lines, start=1):
            stripped = raw.split("#", 1)[0]
            match = self._header.match(stripped)
            if match:
                current = match.group(1).replace(" ", "")
                if current == section:
                    seen += 1
                    header_line = number if seen == occurrence else header_line
                continue
            if key is None or current != section or seen != occurrence:
                continue
            if re.match(rf"^\s*{re.escape(key)}\s*=", stripped):
                return number
        return header_line


class _Parser:
    def __init__(self, path: str, text: str) -> None:
        self.path = path
        self.loc = _Locator(text)

    def error(self, message: str, section: str, key: str | None = None, text: Any = None,
              occurrence: int = 0) -> JobError:
        column = f"{section}.{key}" if key else section
        return JobError(message, file=self.path, line=self.loc.line_of(section, key, occurrence),
                        column=column, text=None if text is None else _shown(text))

    def quantity(self, table: dict[str, Any], section: str, key: str,
                 default: float | None = None, occurrence: int = 0) -> float | None:
        if key not in table:
            return default
        raw = table[key]
        unit = _SECTIONS.get(section.split(".")[-1], {}).get(key, "")
        if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
            raise self.error("expected a number or a quantity in quotes such as \"1.5 mA\"",
                             section, key, raw, occurrence)
        if isinstance(raw, (int, float)):
            try:
                value = float(raw)
            except OverflowError:
                raise self.error("a number beyond any float; no job value comes near it",
                                 section, key, raw, occurrence) from None
            if not math.isfinite(value):
                raise self.error("value must be finite", section, key, raw, occurrence)
        else:
            try:
                value = parse_quantity(raw, unit or "")
            except NotationError as exc:
                raise self.error(exc.message, section, key, raw, occurrence) from None
        if key in ("yield_min", "yield_confidence") and isinstance(raw, (int, float)) and \
                0 < value <= 1:
            wanted = 100 * value if value < 1 else 99.9
            raise self.error(f"{key} is a percent (at least 50, below 100), not a "
                             f"fraction: for {wanted:.6g} % write {key} = {wanted:.6g}",
                             section, key, raw, occurrence)
        problem = implausible(key, value)
        if problem is not None:
            raise self.error(problem, section, key, raw, occurrence)
        return value

    def check_keys(self, table: dict[str, Any], section: str, allowed: set[str],
                   occurrence: int = 0) -> None:
        for key in table:
            if key not in allowed:
                close = difflib.get_close_matches(key, sorted(allowed), n=1)
                hint = f"; did you mean '{close[0]}'?" if close else \
                    f"; known keys: {', '.join(sorted(allowed))}"
                raise self.error(f"unknown key '{key}' in [{section}]{hint}", section, key,
                                 key, occurrence)

    def table(self, doc: dict[str, Any], section: str) -> dict[str, Any]:
        value = doc.get(section, {})
        if not isinstance(value, dict):
            raise self.error(f"[{section}] must be a table", section, None, value)
        self.check_keys(value, section, set(_SECTIONS[section]))
        return value

    # sections --------------------------------------------------------------
    def supply(self, doc: dict[str, Any]) -> Supply:
        t = self.table(doc, "supply")
        if "volts" not in t:
            raise self.error("the job needs [supply] volts", "supply", None, None)
        volts = self.quantity(t, "supply", "volts")
        assert volts is not None
        if volts <= 0:
            raise self.error("supply volts must be positive (a PNP stage also runs from a "
                             "positive supply)", "supply", "volts", t["volts"])
        tol = self.quantity(t, "supply", "tolerance_pct", 0.0)
        assert tol is not None
        if not 0 <= tol < 50:
            raise self.error("supply tolerance must be 0 % or more and below 50 %", "supply",
                             "tolerance_pct", t["tolerance_pct"])
        neg = self.quantity(t, "supply", "negative_volts")
        if neg is not None and neg >= 0:
            raise self.error("negative_volts is the signed negative rail, e.g. -6", "supply",
                             "negative_volts", t["negative_volts"])
        neg_tol = self.quantity(t, "supply", "negative_tolerance_pct")
        if neg_tol is not None and not 0 <= neg_tol < 50:
            raise self.error("tolerance must be 0 % or more and below 50 %", "supply",
                             "negative_tolerance_pct", t["negative_tolerance_pct"])
        mains = t.get("mains_derived", False)
        if not isinstance(mains, bool):
            raise self.error("mains_derived must be true or false", "supply", "mains_derived",
                             mains)
        return Supply(volts, tol, neg, neg_tol, mains)

    def target(self, t: dict[str, Any], section: str, occurrence: int = 0) -> Target:
        self.check_keys(t, section, set(_SECTIONS["target"]), occurrence)
        q: dict[str, Any] = {k: self.quantity(t, section, k, occurrence=occurrence)
                             for k in _SECTIONS["target"]}
        has_window = q["ic"] is not None or q["ic_window_pct"] is not None
        has_bounds = q["ic_min"] is not None or q["ic_max"] is not None
        if has_window and has_bounds:
            key = "ic_min" if q["ic_min"] is not None else "ic_max"
            raise self.error("give either ic with ic_window_pct, or ic_min and ic_max, not both",
                             section, key, t[key], occurrence)
        if has_window:
            if q["ic"] is None or q["ic_window_pct"] is None:
                missing = "ic" if q["ic"] is None else "ic_window_pct"
                raise self.error(f"ic and ic_window_pct go together; {missing} is missing",
                                 section, None, None, occurrence)
            ic, pct = q["ic"], q["ic_window_pct"]
            if ic <= 0:
                raise self.error("ic must be positive", section, "ic", t["ic"], occurrence)
            if not 0 < pct < 100:
                raise self.error("ic_window_pct must be more than 0 and less than 100 %",
                                 section, "ic_window_pct", t["ic_window_pct"], occurrence)
            ic_min, ic_max = ic * (1 - pct / 100), ic * (1 + pct / 100)
        elif has_bounds:
            if q["ic_min"] is None or q["ic_max"] is None:
                raise self.error("ic_min and ic_max go together", section, None, None,
                                 occurrence)
            ic_min, ic_max = q["ic_min"], q["ic_max"]
            if ic_min <= 0:
                raise self.error("ic_min must be positive", section, "ic_min", t["ic_min"],
                                 occurrence)
            if ic_min >= ic_max:
                raise self.error(f"ic_min must be below ic_max ({t['ic_max']})", section,
                                 "ic_min", t["ic_min"], occurrence)
        else:
            raise self.error("the target needs ic with ic_window_pct, or ic_min and ic_max",
                             section, None, None, occurrence)
        vce_min = q["vce_min"] if q["vce_min"] is not None else 0.0
        if vce_min < 0:
            raise self.error("vce_min must not be negative", section, "vce_min", t["vce_min"],
                             occurrence)
        for key in ("swing_pk", "gain_min", "gain_max", "rin_min"):
            if q[key] is not None and q[key] <= 0:
                raise self.error(f"{key} must be positive", section, key, t[key], occurrence)
        if q["gain_min"] is not None and q["gain_max"] is not None and \
                q["gain_min"] >= q["gain_max"]:
            raise self.error(f"gain_min must be below gain_max ({t['gain_max']})", section,
                             "gain_min", t["gain_min"], occurrence)
        # the job states a percent; the Target (and JSON) keep the yield as a fraction
        yield_min = None if q["yield_min"] is None else round(q["yield_min"] / 100, 12)
        confidence = 0.95 if q["yield_confidence"] is None else \
            round(q["yield_confidence"] / 100, 12)
        return Target(ic_min, ic_max, vce_min, q["swing_pk"], q["gain_min"], q["gain_max"],
                      yield_min, ic_set=q["ic"] if not has_bounds else None,
                      yield_confidence=confidence,
                      rin_min=q["rin_min"], divider_ratio_min=q["divider_ratio_min"])

    def limits(self, t: dict[str, Any], section: str, base: Limits | None = None,
               occurrence: int = 0) -> Limits:
        self.check_keys(t, section, set(_SECTIONS["limits"]), occurrence)
        base = base or Limits()
        q: dict[str, Any] = {k: self.quantity(t, section, k, getattr(base, k), occurrence)
                             for k in _SECTIONS["limits"]}
        for key in ("supply_power_max", "supply_current_max"):
            if q[key] is not None and q[key] <= 0:
                raise self.error(f"{key} must be positive", section, key, t[key], occurrence)
        if not 0 < q["resistor_derating"] <= 1:
            raise self.error("resistor_derating is the fraction of the derated rating a part "
                             "may use: more than 0 and at most 1", section, "resistor_derating",
                             t.get("resistor_derating"), occurrence)
        if q["derating_knee_c"] >= q["derating_zero_c"]:
            raise self.error("derating_knee_c must be below derating_zero_c", section,
                             "derating_knee_c", t.get("derating_knee_c"), occurrence)
        return Limits(**q)

    def keep_purpose(self, t: dict[str, Any], section: str, base: KeepPurpose | None = None,
                     occurrence: int = 0) -> KeepPurpose | None:
        """[keep_purpose] or [stage.keep_purpose]: each key a % or false (not held)."""
        self.check_keys(t, section, set(_KEEP_RANGES), occurrence)
        if not t:
            return base
        out = dict(vars(base or KeepPurpose()))
        for key, (lo, hi) in _KEEP_RANGES.items():
            if key not in t:
                continue
            if t[key] is False:
                out[key] = None
                continue
            value = self.quantity(t, section, key, None, occurrence)
            assert value is not None
            if not lo < value <= hi:
                raise self.error(f"{key} is a percentage of today's figure: more than {lo:g} "
                                 f"and at most {hi:g} (false: not held)", section, key, t[key],
                                 occurrence)
            out[key] = value
        return KeepPurpose(**out)

    def environment(self, doc: dict[str, Any]) -> Environment:
        t = self.table(doc, "environment")
        lo = self.quantity(t, "environment", "ambient_min_c", 25.0)
        hi = self.quantity(t, "environment", "ambient_max_c", 25.0)
        assert lo is not None and hi is not None
        if "ambient_min_c" in t and "ambient_max_c" not in t:
            hi = max(hi, lo)
        if "ambient_max_c" in t and "ambient_min_c" not in t:
            lo = min(lo, hi)
        if lo > hi:
            raise self.error(f"ambient_min_c is above ambient_max_c ({t['ambient_max_c']})",
                             "environment", "ambient_min_c", t["ambient_min_c"])
        if lo < -273.15 or hi > 250:
            key = "ambient_min_c" if lo < -273.15 else "ambient_max_c"
            raise self.error("ambient temperature out of any physical range", "environment",
                             key, t[key])
        return Environment(lo, hi)

    def small_signal(self, doc: dict[str, Any]) -> SmallSignal:
        t = self.table(doc, "small_signal")
        load = self.quantity(t, "small_signal", "load", math.inf)
        assert load is not None
        if load <= 0:
            raise self.error("load must be positive (leave it out for no load)", "small_signal",
                             "load", t["load"])
        bypassed = t.get("re_bypassed", True)
        if not isinstance(bypassed, bool):
            raise self.error("re_bypassed must be true or false", "small_signal", "re_bypassed",
                             bypassed)
        return SmallSignal(load, bypassed, tuple(k for k in ("load", "re_bypassed") if k in t))

    def build(self, doc: dict[str, Any]) -> Build:
        t = self.table(doc, "build")
        qty = self.quantity(t, "build", "quantity", 1.0)
        assert qty is not None
        if qty < 1 or qty != math.floor(qty):
            raise self.error("build quantity must be a whole number, 1 or more", "build",
                             "quantity", t.get("quantity"))
        pairs = t.get("allow_pairs", False)
        if not isinstance(pairs, bool):
            raise self.error("allow_pairs must be true or false", "build", "allow_pairs", pairs)
        tol = self.quantity(t, "build", "default_tolerance_pct", 5.0)
        assert tol is not None
        if not 0 < tol <= 50:
            raise self.error("default_tolerance_pct must be more than 0 and at most 50 %",
                             "build", "default_tolerance_pct", t.get("default_tolerance_pct"))
        return Build(int(qty), pairs, tol)

    def search(self, doc: dict[str, Any], supply: Supply) -> Search:
        t = self.table(doc, "search")
        topology = t.get("topology", "divider")
        if topology not in (*TOPOLOGY_NAMES, "any"):
            raise self.error(f"unknown topology; use one of {', '.join(TOPOLOGY_NAMES)} or any",
                             "search", "topology", topology)
        model = t.get("model", "constant_vbe")
        if model not in MODELS:
            raise self.error(f"unknown model; use {' or '.join(MODELS)}", "search", "model",
                             model)
        objectives = t.get("objectives", list(DEFAULT_OBJECTIVES))
        if not isinstance(objectives, list) or not objectives:
            raise self.error("objectives must be a list such as [\"cost\", \"part_count\"]",
                             "search", "objectives", objectives)
        for name in objectives:
            if not isinstance(name, str) or name not in OBJECTIVES:
                raise self.error(f"unknown objective; use any of {', '.join(OBJECTIVES)}",
                                 "search", "objectives", name)
        if len(set(objectives)) != len(objectives):
            raise self.error("an objective is listed twice", "search", "objectives", objectives)
        top = self.quantity(t, "search", "top", 5.0)
        limit = self.quantity(t, "search", "time_limit_s", 20.0)
        seed = self.quantity(t, "search", "seed", 0.0)
        assert top is not None and limit is not None and seed is not None
        if top < 1 or top != math.floor(top):
            raise self.error("top must be a whole number, 1 or more", "search", "top", t["top"])
        if limit <= 0:
            raise self.error("time_limit_s must be positive", "search", "time_limit_s",
                             t["time_limit_s"])
        if topology == "dual_supply" and supply.negative_volts is None:
            raise self.error("topology dual_supply needs [supply] negative_volts", "search",
                             "topology", topology)
        return Search(topology, model, tuple(objectives), int(top), limit, int(seed))

    def stages(self, doc: dict[str, Any], search: Search, supply: Supply) -> tuple[Stage, ...]:
        default_limits = self.limits(self.table(doc, "limits"), "limits")
        default_keep = self.keep_purpose(self.table(doc, "keep_purpose"), "keep_purpose")
        raw_stages = doc.get("stage")
        if raw_stages is None:
            if "target" not in doc:
                raise self.error("the job needs a [target] (or [[stage]] tables for a board)",
                                 "target", None, None)
            target = self.target(self.table(doc, "target"), "target")
            return (Stage("stage", search.topology, target, default_limits,
                          keep_purpose=default_keep),)
        if "target" in doc:
            raise self.error("a board file gives each [[stage]] its own [stage.target]; "
                             "remove the top-level [target]", "target", None, None)
        if not isinstance(raw_stages, list):
            raise self.error("stages are written as [[stage]] tables", "stage", None, None)
        stages: list[Stage] = []
        names: set[str] = set()
        for i, raw in enumerate(raw_stages):
            if not isinstance(raw, dict):
                raise self.error("stages are written as [[stage]] tables", "stage", None, raw, i)
            for sub in ("target", "limits", "values", "keep_purpose", "refs"):
                if sub in raw and not isinstance(raw[sub], dict):
                    raise self.error(f"{sub} is a table: write [stage.{sub}] under the "
                                     "[[stage]]", "stage", sub, raw[sub], i)
            self.check_keys(raw, "stage", _STAGE_KEYS, i)
            name = raw.get("name")
            if not isinstance(name, str) or not name.strip():
                raise self.error("every [[stage]] needs a name", "stage", "name", name, i)
            if name in names:
                raise self.error("two stages have the same name", "stage", "name", name, i)
            names.add(name)
            topology = raw.get("topology", search.topology)
            if topology not in (*TOPOLOGY_NAMES, "any"):
                raise self.error("unknown topology", "stage", "topology", topology, i)
            if topology == "dual_supply" and supply.negative_volts is None:
                raise self.error("topology dual_supply needs [supply] negative_volts", "stage",
                                 "topology", topology, i)
            if "target" not in raw:
                raise self.error(f"stage '{name}' needs a [stage.target]", "stage", "name",
                                 name, i)
            target = self.target(raw["target"], "stage.target", i)
            limits = self.limits(raw.get("limits", {}), "stage.limits", default_limits, i)
            transistor = raw.get("transistor")
            if transistor is not None and not isinstance(transistor, str):
                raise self.error("transistor is a part id in quotes", "stage", "transistor",
                                 transistor, i)
            values = raw.get("values", {})
            if not isinstance(values, dict) or not all(
                    isinstance(v, (str, int, float)) for v in values.values()):
                raise self.error("[stage.values] maps roles to part ids or values", "stage.values",
                                 None, values, i)
            keep = self.keep_purpose(raw.get("keep_purpose", {}), "stage.keep_purpose",
                                     default_keep, i)
            refs = raw.get("refs", {})
            if not all(isinstance(v, str) for v in refs.values()):
                raise self.error("[stage.refs] maps roles to reference designators in quotes",
                                 "stage.refs", None, refs, i)
            stages.append(Stage(name, topology, target, limits, transistor,
                                {str(k): str(v) for k, v in values.items()}, keep,
                                {str(k): v for k, v in refs.items()}))
        if not stages:
            raise self.error("a board needs at least one [[stage]]", "stage", None, None)
        self.shared_designators(stages)
        return tuple(stages)

    def shared_designators(self, stages: list[Stage]) -> None:
        """Two stages naming one schematic part in [stage.refs] share a node: they are
        DC-coupled and cannot be designed as independent stages of one board."""
        owner: dict[str, str] = {}
        for i, st in enumerate(stages):
            for designator in {d for v in st.refs.values() for d in re.split(r"[+|]", v) if d}:
                if designator in owner:
                    raise self.error(f"stages '{owner[designator]}' and '{st.name}' both name "
                                     f"{designator}: stages that share a part are DC-coupled "
                                     "and cannot be designed as independent stages",
                                     "stage.refs", None, designator, i)
                owner[designator] = st.name


def _shown(value: Any) -> str:
    """The offending text for a message: as found, shortened past 60 characters."""
    try:
        text = str(value)
    except ValueError:  # an integer (from TOML hex, octal or binary) of thousands of digits
        return "a number of thousands of digits"
    return text if len(text) <= 60 else f"{text[:40]}… ({len(text)} characters)"


def _first_line(text: str, pattern: str) -> int | None:
    found = re.search(pattern, text)
    return text.count("\n", 0, found.start()) + 1 if found else None


def _deep_line(text: str, depth: int = 100) -> int | None:
    """The line where brackets and braces first nest ``depth`` deep (quotes not parsed)."""
    level = 0
    for number, line in enumerate(text.splitlines(), start=1):
        for char in line:
            level += (char in "[{") - (char in "]}")
            if level >= depth:
                return number
    return None


def _refuse_unfilled(parser: _Parser, doc: dict[str, Any]) -> None:
    """A JobError naming the first entry still marked ``fill in …`` (a board written from a
    netlist marks what the netlist does not say that way)."""
    def walk(table: dict[str, Any], section: str, occurrence: int) -> None:
        for key, value in table.items():
            if isinstance(value, dict):
                walk(value, f"{section}.{key}" if section else key, occurrence)
            elif isinstance(value, list) and key == "stage":
                for i, item in enumerate(value):
                    if isinstance(item, dict):
                        walk(item, "stage", i)
            elif isinstance(value, str) and value.strip().casefold().startswith(FILL_IN):
                raise parser.error("still to be filled in: " + value.strip()[len(FILL_IN):]
                                   .lstrip(" :"), section, key, value, occurrence)
    walk(doc, "", 0)


def parse_job(text: str, path: str = "<job>") -> Job:
    """Parse the text of a job file; see :func:`load_job`.  A leading byte-order mark is
    ignored (editors on some systems save UTF-8 with one)."""
    text = text.removeprefix("\ufeff")
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        match = re.search(r"line (\d+)", str(exc))
        raise JobError(f"not valid TOML: {exc}", file=path,
                       line=int(match.group(1)) if match else None) from None
    except ValueError:  # Python refuses integers of more than 4300 digits
        raise JobError("a number with thousands of digits; no job value needs more than a "
                       "few", file=path, line=_first_line(text, r"\w{4000}")) from None
    except RecursionError:
        raise JobError("arrays or tables nested too deeply to be a job", file=path,
                       line=_deep_line(text)) from None
    parser = _Parser(path, text)
    _refuse_unfilled(parser, doc)
    known = {*_SECTIONS, "stage"}
    for section in doc:
        if section not in known:
            close = difflib.get_close_matches(section, sorted(known), n=1)
            hint = f"; did you mean [{close[0]}]?" if close else ""
            raise parser.error(f"unknown section [{section}]{hint}", section, None, section)
    supply = parser.supply(doc)
    search = parser.search(doc, supply)
    return Job(path=path, supply=supply, environment=parser.environment(doc),
               small_signal=parser.small_signal(doc), build=parser.build(doc), search=search,
               stages=parser.stages(doc, search, supply))


def load_job(path: str | Path) -> Job:
    """Read and validate a job (or board) file.

    Parameters
    ----------
    path : str or Path
        The TOML job file.

    Raises
    ------
    JobError
        Malformed or self-contradictory job, naming file, line, key and text.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise JobError(f"cannot read the job file: {exc.strerror}", file=str(path)) from None
    except UnicodeDecodeError:
        raise JobError("job file is not UTF-8 text", file=str(path)) from None
    return parse_job(text, str(path))


def stage_key_error(job: Job, stage_name: str, key: str, message: str,
                    text: str | None = None) -> JobError:
    """A JobError about one key of a ``[[stage]]`` (``values.R1``, ``transistor``), with the
    file and, where the file can be read again, its line."""
    index = next((i for i, s in enumerate(job.stages) if s.name == stage_name), 0)
    section, _, name = key.rpartition(".")
    section = "stage" + (f".{section}" if section else "")
    line = None
    with contextlib.suppress(OSError, UnicodeDecodeError):
        line = _Locator(Path(job.path).read_text(encoding="utf-8-sig")).line_of(
            section, name, index)
    return JobError(f"stage '{stage_name}': {message}", file=job.path, line=line,
                    column=f"{section}.{name}", text=text)
