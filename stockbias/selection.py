"""Which design the bench commands act on: a search rank, a saved result, or given values.

``export``, ``stock reserve`` and the pick list all work on one chosen stage.
A board file holds several stages; :func:`pick_stage` narrows it to the one
``--stage NAME`` names (its own topology, target, limits and fitted parts).
The stage's design is named in one of four ways on the command line:

* ``--rank N``: run the design search on the job (or the stage) and take the
  N-th design;
* ``--from RESULT.json``: a result saved by ``design --save`` (or its
  ``--json`` output), design ``--rank N`` within it (default 1); of a board
  result, the stage ``--stage`` names;
* ``--values ROLE=...,... --transistor ID``: parts given by hand;
* none of these, for a stage whose file gives its transistor and
  ``[stage.values]``: the parts fitted today (:func:`fitted_selection`).

Each becomes one :class:`Selection` (topology, transistor part id and the
``ROLE=`` assignment text that :func:`stockbias.analysis.check.analyze`
takes; a pair is written ``A+B`` or ``A|B``).  :func:`bench_needs` counts
what a resolved selection takes from the shelf for a build, and
:func:`board_needs` what every stage of a board takes together.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .assign import ResolvedResistor, parse_assignments, resolve_resistor
from .errors import InputError, UnmetError
from .job import TOPOLOGY_NAMES, Job, Stage, load_job, stage_key_error
from .parts import Inventory, Transistor

if TYPE_CHECKING:
    from .analysis.check import CheckResult
from .topologies import get_network
from .units import format_quantity

__all__ = [
    "ACCEPT_CHANGED_OPTION",
    "Need",
    "ResultFileError",
    "Selection",
    "bench_needs",
    "board_needs",
    "check_inputs",
    "choose",
    "failing_summary",
    "fitted_parts",
    "fitted_selection",
    "from_design",
    "from_result_file",
    "from_search",
    "from_values",
    "input_record",
    "pick_stage",
    "resolve_selection",
    "verify_selection",
]

#: The option that lets a saved result whose job or stock file changed be used after a
#: re-verification against the current files.
ACCEPT_CHANGED_OPTION = "--accept-changed-inputs"

_ARRANGEMENT_SIGN = {"series": "+", "parallel": "|"}


class ResultFileError(InputError):
    """A saved design result that is not in the shape ``design --save`` writes."""

    field_label = "key"


@dataclass(frozen=True)
class Selection:
    """One chosen stage.

    Attributes
    ----------
    topology : str
        Bias network name.
    transistor_id : str
        Stock part id of the transistor.
    values : dict
        role → assignment text (part id, value, ``A+B`` or ``A|B``).
    source : str
        Where the choice came from, for reports (``"design rank 2 of r.json"``).
    inputs : dict or None
        For a saved result, what it records of the files it was computed from
        (``{"job": {"path", "sha256", "size"}, "inventory": {...}}``); ``{}`` when it
        records nothing; None for a selection that is not from a saved result.
    file : str or None
        The saved result's path (None when not from a file).
    stage : str or None
        The board stage whose fitted parts these are (:func:`fitted_selection`):
        a problem with them names the stage's key in the job file.  None otherwise.
    """

    topology: str
    transistor_id: str
    values: dict[str, str]
    source: str
    inputs: dict[str, Any] | None = field(default=None, compare=False)
    file: str | None = field(default=None, compare=False)
    stage: str | None = field(default=None, compare=False)

    def job_for(self, job: Job) -> Job:
        """The job with its stage set to this selection's topology."""
        if job.stage.topology == self.topology:
            return job
        return job.with_topology(self.topology)

    def assignment_text(self) -> str:
        """``R1=A,R2=B+C,...`` as one would type it after ``--values``."""
        return ",".join(f"{role}={text}" for role, text in self.values.items())

    def to_dict(self) -> dict[str, object]:
        return {"topology": self.topology, "transistor": self.transistor_id,
                "values": dict(self.values), "source": self.source}


def from_values(job: Job, values: str | list[str], transistor: str | None,
                source: str = "--values") -> Selection:
    """A selection from ``--values`` text and ``--transistor``."""
    if not transistor:
        raise InputError("--values needs --transistor ID (the transistor's stock part id)",
                         column="--transistor")
    assignment = parse_assignments(values, source)
    if not assignment:
        raise InputError("--values is empty; give ROLE=VALUE_OR_PART_ID pairs",
                         column="--values")
    topology = job.stage.topology
    if topology == "any":
        raise InputError("the job's topology is 'any': with --values the stage needs one "
                         "topology; set [search] topology in the job", file=job.path,
                         column="search.topology", text="any")
    return Selection(topology, transistor, assignment, source)


def pick_stage(job: Job, name: str | None, doing: str) -> Job:
    """The one-stage job a command acts on (``--stage NAME``).

    A board's stage keeps its own topology, target, limits, transistor and
    ``[stage.values]`` and shares the rest of the file.  A job of one stage is
    returned as it is (``name``, if given, must be that stage's).

    Parameters
    ----------
    job : Job
    name : str or None
        The ``--stage`` option.
    doing : str
        What the command does with the stage, for the message (``"export"``).

    Raises
    ------
    InputError
        A board of several stages without ``name``, or a name that is not one of its
        stages; the message names the file and the stages there are.
    """
    names = ", ".join(s.name for s in job.stages)
    if name is None:
        if len(job.stages) > 1:
            raise InputError(f"the board has {len(job.stages)} stages: name the one to "
                             f"{doing} with --stage NAME (stages: {names})", file=job.path,
                             column="--stage")
        return job
    found = next((s for s in job.stages if s.name == name), None)
    if found is None:
        raise InputError(f"no stage of that name in the file; its stages: {names}",
                         file=job.path, column="--stage", text=name)
    return job if len(job.stages) == 1 else replace(job, stages=(found,))


def _stage_error(job: Job, stage: str, key: str, message: str,
                 text: str | None = None) -> InputError:
    """:func:`stockbias.job.stage_key_error` located in the whole file, also when ``job`` is
    one stage of a board (:func:`pick_stage`): the file is read again to find the stage."""
    full = job
    if len(job.stages) == 1:
        with contextlib.suppress(InputError, OSError):
            full = load_job(job.path)
    return stage_key_error(full, stage, key, message, text)


def fitted_selection(job: Job, stage: Stage | None = None) -> Selection:
    """The parts a board stage is fitted with today: its ``transistor`` and
    ``[stage.values]`` (``stage`` defaults to the job's only stage)."""
    st = job.stage if stage is None else stage
    if st.topology == "any":
        raise _stage_error(job, st.name, "topology", "the stage's fitted parts need its "
                              "topology", "any")
    if not st.values:
        raise _stage_error(job, st.name, "values", "no fitted parts: give the stage's "
                              "[stage.values] (or --values ... --transistor ID with --stage)")
    if st.transistor is None:
        raise _stage_error(job, st.name, "transistor", "no fitted transistor: give "
                              "transistor = \"PART_ID\" in the stage (or --transistor ID "
                              "with --stage)")
    return Selection(st.topology, st.transistor, dict(st.values),
                     f"stage '{st.name}' as fitted ([stage.values] of {job.path})",
                     stage=st.name)


def fitted_parts(job: Job, stage: Stage, inventory: Inventory,
                 tolerance_pct: float | None = None
                 ) -> tuple[Transistor, dict[str, ResolvedResistor]]:
    """A board stage's fitted transistor and resolved parts; every problem names the stage's
    key in the job file (``stage.values.R1``, ``stage.transistor``) and its line.

    ``tolerance_pct`` is taken for values that are not stock parts (default: the job's).
    """
    from .analysis.check import check_roles

    sel = fitted_selection(job, stage)
    q = inventory.find_transistor(sel.transistor_id)
    if q is None:
        raise _stage_error(job, stage.name, "transistor", f"transistor {stage.transistor} "
                              "is not in the stock file", stage.transistor)
    try:
        check_roles(stage.topology, stage.values)
    except InputError as exc:
        one_role = exc.text and "=" not in exc.text
        raise _stage_error(job, stage.name, f"values.{exc.text}" if one_role else "values",
                              exc.message, exc.text) from None
    tol = job.build.default_tolerance_pct if tolerance_pct is None else tolerance_pct
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    parts = {}
    for role, text in stage.values.items():
        try:
            parts[role] = resolve_resistor(role, text, inventory, tol, source="stage.values",
                                           ambient=ambient)
        except InputError as exc:
            raise _stage_error(job, stage.name, f"values.{role}", exc.message,
                                  text) from None
    return q, parts


def _design_values(design: Mapping[str, Any], where: str, file: str) -> dict[str, str]:
    parts = design.get("parts")
    if not isinstance(parts, dict) or not parts:
        raise ResultFileError("a design needs a 'parts' object mapping roles to parts",
                              file=file, column=f"{where}.parts")
    out: dict[str, str] = {}
    for role, part in parts.items():
        key = f"{where}.parts.{role}"
        if not isinstance(part, dict):
            raise ResultFileError("each part is an object with part_id and value_ohm",
                                  file=file, column=key, text=json.dumps(part))
        pid = part.get("part_id")
        arrangement = part.get("arrangement", "single" if not isinstance(pid, list) else None)
        if isinstance(pid, str) and pid.strip():
            if arrangement not in ("single", None):
                raise ResultFileError("a series or parallel pair needs a list of two part ids",
                                      file=file, column=f"{key}.part_id", text=pid)
            out[str(role)] = pid.strip()
        elif isinstance(pid, list):
            if len(pid) != 2 or not all(isinstance(p, str) and p.strip() for p in pid):
                raise ResultFileError("a pair is a list of two part ids", file=file,
                                      column=f"{key}.part_id", text=json.dumps(pid))
            if arrangement not in _ARRANGEMENT_SIGN:
                raise ResultFileError("a pair's arrangement must be 'series' or 'parallel'",
                                      file=file, column=f"{key}.arrangement",
                                      text=json.dumps(arrangement))
            out[str(role)] = _ARRANGEMENT_SIGN[arrangement].join(p.strip() for p in pid)
        elif pid is None:  # a value that is not a stock part
            value = part.get("value_ohm")
            if isinstance(value, bool) or not isinstance(value, (int, float)) or \
                    not math.isfinite(value) or value <= 0:
                raise ResultFileError("a part without part_id needs a positive value_ohm",
                                      file=file, column=f"{key}.value_ohm",
                                      text=json.dumps(value))
            out[str(role)] = f"{float(value):.12g}"
        else:
            raise ResultFileError("part_id must be a part id, a list of two, or null",
                                  file=file, column=f"{key}.part_id", text=json.dumps(pid))
    return out


def from_design(design: Mapping[str, Any], source: str, *, file: str = "<result>",
                where: str = "design") -> Selection:
    """A selection from one design object of a saved result (see the module notes)."""
    if not isinstance(design, dict):
        raise ResultFileError("a design must be a JSON object", file=file, column=where)
    topology = design.get("topology")
    if topology not in TOPOLOGY_NAMES:
        raise ResultFileError(f"unknown topology; expected one of {', '.join(TOPOLOGY_NAMES)}",
                              file=file, column=f"{where}.topology", text=json.dumps(topology))
    tr = design.get("transistor")
    tid = tr.get("part_id") if isinstance(tr, dict) else None
    if not isinstance(tid, str) or not tid.strip():
        raise ResultFileError("a design needs transistor.part_id", file=file,
                              column=f"{where}.transistor.part_id", text=json.dumps(tid))
    values = _design_values(design, where, file)
    return Selection(str(topology), tid.strip(), values, source)


def from_result_file(path: str | Path, rank: int = 1, stage: str | None = None) -> Selection:
    """Design ``rank`` of a result saved by ``design --save`` (or its ``--json`` output);
    of a board result, its stage ``stage`` (required there)."""
    path = Path(path)
    file = str(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except RecursionError:
        raise ResultFileError("the JSON is nested too deeply to be a saved result", file=file) \
            from None
    except OSError as exc:
        raise ResultFileError(f"cannot read the result file: {exc.strerror}", file=file) \
            from None
    except UnicodeDecodeError:
        raise ResultFileError("result file is not UTF-8 text", file=file) from None
    except json.JSONDecodeError as exc:
        raise ResultFileError(f"not valid JSON: {exc.msg}", file=file, line=exc.lineno) \
            from None
    if not isinstance(doc, dict):
        raise ResultFileError("expected a JSON object with a 'designs' list (as written by "
                              "design --save)", file=file)
    designs = doc.get("designs")
    if not isinstance(designs, list):
        raise ResultFileError("expected a 'designs' list (as written by design --save)",
                              file=file, column="designs")
    if not designs:
        status = doc.get("status")
        why = f" (search status {status})" if isinstance(status, str) else ""
        raise ResultFileError(f"the result holds no designs{why}", file=file, column="designs")
    if rank < 1:
        raise InputError("--rank counts from 1", column="--rank", text=str(rank))
    index = next((i for i, d in enumerate(designs)
                  if isinstance(d, dict) and d.get("rank") == rank), None)
    if index is None:
        if any(isinstance(d, dict) and "rank" in d for d in designs) or rank > len(designs):
            raise ResultFileError(f"no design of rank {rank}; the file holds "
                                  f"{len(designs)} design(s)", file=file, column="designs",
                                  text=str(rank))
        index = rank - 1
    sel = _board_stage_design(designs[index], rank, index, stage, file)
    if sel is None:
        sel = from_design(designs[index], f"design rank {rank} of {file}", file=file,
                          where=f"designs[{index}]")
    inputs = doc.get("inputs")
    return replace(sel, inputs=dict(inputs) if isinstance(inputs, dict) else {}, file=file)


def _board_stage_design(design: Any, rank: int, index: int, stage: str | None,
                        file: str) -> Selection | None:
    """The stage ``stage`` of a board design (a design with a ``stages`` list); None for a
    one-stage design."""
    stages = design.get("stages") if isinstance(design, dict) else None
    if not isinstance(stages, list):
        return None
    names = [s.get("name") for s in stages if isinstance(s, dict)]
    shown = ", ".join(str(n) for n in names)
    if stage is None:
        raise ResultFileError(f"the result is a board design: name the stage with --stage NAME "
                              f"(stages: {shown})", file=file, column=f"designs[{index}].stages")
    if stage not in names:
        raise ResultFileError(f"the board design has no stage of that name; its stages: "
                              f"{shown}", file=file, column=f"designs[{index}].stages",
                              text=stage)
    j = names.index(stage)
    return from_design(stages[j], f"stage '{stage}' of design rank {rank} of {file}",
                       file=file, where=f"designs[{index}].stages[{j}]")


def input_record(path: str | Path) -> dict[str, object]:
    """What a saved result records of one input file: its absolute path, SHA-256 and size,
    bytes."""
    data = Path(path).read_bytes()
    return {"path": os.path.abspath(path), "sha256": hashlib.sha256(data).hexdigest(),
            "size": len(data)}


_INPUT_WORDS = {"job": ("job file", "the job"), "inventory": ("stock file", "the shelf")}


def check_inputs(selection: Selection, job_path: str | Path, inventory_path: str | Path, *,
                 accept_changed: bool = False) -> list[str]:
    """Check that a saved result belongs to this job file and this stock file.

    Compares the SHA-256 the result records (``design --save``) with the files'
    now.  A selection that is not from a saved result passes unchecked.

    Returns
    -------
    list of str
        What changed, in words (``"the stock file shelf.csv"``); non-empty only with
        ``accept_changed``, and then the caller must re-verify the design
        (:func:`verify_selection`).

    Raises
    ------
    ResultFileError
        A file changed (or the result records none), without ``accept_changed``:
        the message names the file and both ways on.
    """
    if selection.inputs is None:
        return []
    result_file = selection.file or "<result>"
    way_on = (f"run design again and save a new result, or pass {ACCEPT_CHANGED_OPTION} "
              "to re-verify this design against the current files")
    changed: list[str] = []
    for key, now_path in (("job", job_path), ("inventory", inventory_path)):
        noun, _ = _INPUT_WORDS[key]
        record = selection.inputs.get(key)
        recorded = record.get("sha256") if isinstance(record, dict) else None
        if not isinstance(recorded, str):
            what = f"the result records no SHA-256 of its {noun}"
            if not accept_changed:
                raise ResultFileError(f"{what}, so it cannot be matched with {now_path}; "
                                      f"{way_on}", file=result_file, column=f"inputs.{key}")
            changed.append(f"the {noun} {now_path} (not recorded)")
            continue
        try:
            now = input_record(now_path)
        except OSError as exc:
            raise InputError(f"cannot read the {noun}: {exc.strerror}", file=str(now_path)) \
                from None
        if now["sha256"] == recorded:
            continue
        was = record.get("path", "?") if isinstance(record, dict) else "?"
        if not accept_changed:
            raise ResultFileError(
                f"the {noun} {now_path} is not the one this result was designed from "
                f"({was}, SHA-256 {recorded[:12]}…, now {str(now['sha256'])[:12]}…); "
                f"{way_on}", file=result_file, column=f"inputs.{key}.sha256")
        changed.append(f"the {noun} {now_path}")
    return changed


def verify_selection(job: Job, selection: Selection, inventory: Inventory) -> CheckResult:
    """Re-check a selection against the job and shelf with the code ``check`` uses.

    Monte Carlo runs (2000 boards, the job's seed) only when the job sets a yield
    target, as in the design search's own re-verification.
    """
    from .analysis.check import analyze_stage

    job = selection.job_for(job)
    parts, t = resolve_selection(job, selection, inventory)
    samples = 2000 if job.stage.target.yield_min is not None else 0
    return analyze_stage(job, job.stage, parts, t, samples=samples, seed=job.search.seed,
                         topology=selection.topology)


def failing_summary(result: CheckResult) -> str:
    """The failing limits of a check in words: name, worst value, limit and margin."""
    def words(x: float, unit: str) -> str:
        if not math.isfinite(x):
            return "n/a"
        try:
            return format_quantity(x, unit)
        except (KeyError, ValueError):
            return f"{x:.4g} {unit}".strip()

    return "; ".join(f"{c.name} (worst {words(c.worst, c.unit)} against limit "
                     f"{words(c.limit, c.unit)})" for c in result.failing)


def from_search(job: Job, inventory: Inventory, rank: int, *,
                time_limit_s: float | None = None) -> Selection:
    """Run the design search and take design ``rank`` (1 = best)."""
    if rank < 1:
        raise InputError("--rank counts from 1", column="--rank", text=str(rank))
    try:
        from .search.design import design
    except ImportError:
        raise InputError("the design search is not available in this installation; use "
                         "--from RESULT.json or --values ... --transistor ID",
                         column="--rank", text=str(rank)) from None
    result = design(job, inventory, top=max(rank, job.search.top), time_limit_s=time_limit_s)
    data = result.to_dict()
    designs: list[Any] = list(data.get("designs") or [])  # type: ignore[call-overload]
    if not designs:
        raise UnmetError(f"the search found no design that meets the job (status "
                         f"{data.get('status')}); nothing to act on", file=job.path)
    if rank > len(designs):
        raise InputError(f"--rank {rank} but the search found {len(designs)} design(s)",
                         column="--rank", text=str(rank))
    return from_design(designs[rank - 1], f"design rank {rank} of a search on {job.path}",
                       file=job.path, where=f"designs[{rank - 1}]")


def choose(job: Job, inventory: Inventory, *, rank: int | None = None,
           from_file: str | Path | None = None, values: list[str] | None = None,
           transistor: str | None = None, stage: str | None = None) -> Selection:
    """The command-line rule: at most one of ``--rank``, ``--from``, ``--values``; with
    none, the stage's fitted parts when its file gives them.

    ``job`` is the one-stage job (:func:`pick_stage`); ``stage`` the ``--stage`` option,
    which picks the stage of a board result given with ``--from``.
    """
    given = [name for name, v in (("--from", from_file), ("--values", values)) if v]
    if len(given) > 1:
        raise InputError("give either --from RESULT.json or --values, not both",
                         column="--values")
    if transistor and not values:
        raise InputError("--transistor goes with --values", column="--transistor",
                         text=transistor)
    if values:
        if rank is not None:
            raise InputError("--rank picks a design from a search or a result file; it "
                             "does not go with --values", column="--rank", text=str(rank))
        return from_values(job, values, transistor)
    if from_file is not None:
        return from_result_file(from_file, 1 if rank is None else rank, stage)
    if rank is not None:
        return from_search(job, inventory, rank)
    if len(job.stages) == 1 and job.stage.values:
        return fitted_selection(job)
    raise InputError("say which design: --rank N (search), --from RESULT.json, or "
                     "--values ROLE=...,... --transistor ID", column="--rank")


def resolve_selection(job: Job, selection: Selection, inventory: Inventory,
                      tolerance_pct: float | None = None
                      ) -> tuple[dict[str, ResolvedResistor], Transistor]:
    """The selection's resistors resolved against the stock, and its transistor row."""
    if selection.stage is not None:  # a stage's fitted parts: problems name its keys
        st = next(s for s in job.stages if s.name == selection.stage)
        q, fitted = fitted_parts(job, st, inventory, tolerance_pct)
        return fitted, q
    network = get_network(selection.topology)
    unknown = sorted(set(selection.values) - set(network.role_names))
    if unknown:
        raise InputError(f"{network.name} has no role {unknown[0]}; its roles are "
                         f"{', '.join(network.role_names)}", column="--values", text=unknown[0])
    missing = [r for r in network.required_roles if r not in selection.values]
    if missing:
        raise InputError(f"{network.name} needs a value for {', '.join(missing)}",
                         column="--values", text=selection.assignment_text())
    t = inventory.find_transistor(selection.transistor_id)
    if t is None:
        ids = ", ".join(x.part_id for x in inventory.transistors) or "none"
        raise InputError(f"no transistor with that part id in {inventory.path}; transistors: "
                         f"{ids}", column="--transistor", text=selection.transistor_id)
    tol = job.build.default_tolerance_pct if tolerance_pct is None else tolerance_pct
    ambient = (job.environment.ambient_min_c, job.environment.ambient_max_c)
    parts = {role: resolve_resistor(role, text, inventory, tol, ambient=ambient)
             for role, text in selection.values.items()}
    return parts, t


@dataclass(frozen=True)
class Need:
    """What one stock line (or one off-stock value) gives to a build.

    Attributes
    ----------
    part_id : str
        Stock part id; ``""`` for a value that is not in stock.
    kind : {"resistor", "transistor"}
    description : str
        Value and rating in words (``"4.7 kΩ ±5 % 0.25 W"``).
    roles : tuple of str
        The roles it fills (``("R1", "R2")``; a pair's part appears under its role).
    per_board : int
        Pieces on one board.
    quantity : int
        Pieces for the build (per_board × build quantity).
    line : int
        Physical line in the stock file (0 off stock).
    location : str
        Where it is kept.
    in_stock : int or None
        Pieces on the shelf now (None off stock).
    """

    part_id: str
    kind: str
    description: str
    roles: tuple[str, ...]
    per_board: int
    quantity: int
    line: int = 0
    location: str = ""
    in_stock: int | None = None

    @property
    def remaining(self) -> int | None:
        return None if self.in_stock is None else self.in_stock - self.quantity

    @property
    def short(self) -> bool:
        return self.in_stock is None or self.quantity > self.in_stock

    def to_dict(self) -> dict[str, object]:
        return {"part_id": self.part_id or None, "kind": self.kind,
                "description": self.description, "roles": list(self.roles),
                "per_board": self.per_board, "quantity": self.quantity, "line": self.line,
                "location": self.location, "in_stock": self.in_stock,
                "remaining": self.remaining}


def _resistor_words(value: float, tol_pct: float, power: float | None) -> str:
    text = f"{format_quantity(value, 'ohm')} ±{tol_pct:g} %"
    return text if power is None else f"{text} {format_quantity(power, 'W')}"


def bench_needs(parts: Mapping[str, ResolvedResistor], transistor: Transistor,
                build_quantity: int) -> list[Need]:
    """Pieces each stock line gives to ``build_quantity`` boards, in order of first use.

    A part used in two roles (or twice in a pair) is one line with both counted;
    a value that is not in stock is its own line with ``part_id`` ``""``.
    """
    if build_quantity < 1:
        raise ValueError(f"build quantity must be at least 1, got {build_quantity}")
    order: list[str] = []
    count: dict[str, int] = {}
    roles: dict[str, list[str]] = {}
    rows: dict[str, Any] = {}
    off: list[Need] = []
    for role, p in parts.items():
        if p.off_stock and not p.parts:
            off.append(Need("", "resistor", _resistor_words(p.value, 100 * p.tol, None) +
                            " (not in stock)", (role,), 1, build_quantity))
            continue
        if p.off_stock:  # a pair with one half off the shelf
            off.append(Need("", "resistor", f"the other half of {role}'s {p.arrangement} pair "
                            "(not in stock)", (role,), 1, build_quantity))
        for part in p.parts:
            if part.part_id not in count:
                order.append(part.part_id)
                count[part.part_id] = 0
                roles[part.part_id] = []
                rows[part.part_id] = part
            count[part.part_id] += 1
            if role not in roles[part.part_id]:
                roles[part.part_id].append(role)
    out = [Need(transistor.part_id, "transistor",
                f"{transistor.polarity} hFE {transistor.hfe_min:g}–{transistor.hfe_max:g}, "
                f"VCEO {format_quantity(transistor.vceo_max, 'V')}", ("Q",), 1,
                build_quantity, transistor.line, transistor.location, transistor.qty)]
    for pid in order:
        r = rows[pid]
        out.append(Need(pid, "resistor", _resistor_words(r.value_ohm, r.tolerance_pct, r.power_w),
                        tuple(roles[pid]), count[pid], count[pid] * build_quantity, r.line,
                        r.location, r.qty))
    return [*out, *off]



def board_needs(stages: Sequence[tuple[str, Mapping[str, ResolvedResistor], Transistor]],
                build_quantity: int) -> list[Need]:
    """Pieces each stock line gives to ``build_quantity`` boards of every stage together.

    ``stages`` holds (stage name, resolved parts, transistor) for each stage.  A line
    used by several stages is one line with its pieces summed; each role is named
    ``ROLE@STAGE`` (``Q@input`` for a transistor).  Values not in stock stay lines of
    their own.
    """
    merged: dict[str, Need] = {}
    off: list[Need] = []
    for name, parts, transistor in stages:
        for n in bench_needs(parts, transistor, build_quantity):
            roles = tuple(f"{role}@{name}" for role in n.roles)
            if not n.part_id:
                off.append(replace(n, roles=roles))
                continue
            have = merged.get(n.part_id)
            merged[n.part_id] = replace(n, roles=roles) if have is None else replace(
                have, roles=(*have.roles, *roles), per_board=have.per_board + n.per_board,
                quantity=have.quantity + n.quantity)
    ordered = sorted(merged.values(), key=lambda n: n.kind != "transistor")
    return [*ordered, *off]
