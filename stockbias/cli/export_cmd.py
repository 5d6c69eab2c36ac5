"""`stockbias export JOB`: the chosen stage as a SPICE netlist (and its pick list)."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from ..errors import InputError, UnmetError
from ..units import format_quantity
from .common import ForceOpt, InventoryOpt, JobArg, JsonOpt, load

if TYPE_CHECKING:  # loaded by the commands when they run (selection brings in numpy)
    from ..job import Job
    from ..parts import Inventory
    from ..selection import Selection

# selection.ACCEPT_CHANGED_OPTION, the name its messages give; written out here so that the
# option can be declared without loading the analysis (a test checks the two agree)
ACCEPT_CHANGED_OPTION = "--accept-changed-inputs"

__all__ = ["AcceptChangedOpt", "BenchStageOpt", "FromOpt", "RankOpt", "TransistorOpt",
           "ValuesOpt", "export", "select"]

RankOpt = Annotated[int | None, typer.Option(
    "--rank", metavar="N",
    min=1, help="Design N of the search (or of the --from file; default 1).")]
BenchStageOpt = Annotated[str | None, typer.Option(
    "--stage", metavar="NAME",
    help="The stage of a board file (needed when it has several): its own topology, "
    "target and limits; --from takes this stage of a board result. Without --rank, "
    "--from or --values: the parts it is fitted with (its transistor and "
    "[stage.values]).")]
FromOpt = Annotated[Path | None, typer.Option(
    "--from", exists=True, dir_okay=False, readable=True,
    help="A result saved by design --save (JSON).")]
ValuesOpt = Annotated[list[str] | None, typer.Option(
    "--values", "-v", metavar="ROLE=VALUE",
    help="ROLE=VALUE_OR_PART_ID[,...]; a series pair A+B, a parallel pair "
    "A|B. Repeatable. Goes with --transistor.")]
TransistorOpt = Annotated[str | None, typer.Option(
    "--transistor", "-t", metavar="PART_ID",
    help="Stock part id of the transistor (with --values).")]
AcceptChangedOpt = Annotated[bool, typer.Option(
    ACCEPT_CHANGED_OPTION, help="Use a --from result although the job or stock file changed "
    "since it was saved, after re-verifying the design against the current files.")]


def select(job: Job, inventory: Inventory, rank: int | None, from_file: Path | None,
           values: list[str] | None, transistor: str | None,
           stage: str | None = None) -> Selection:
    """The design the command acts on (at most one of --rank, --from, --values; none: the
    stage's fitted parts).  ``job`` is the one stage (``--stage``) the command acts on."""
    from ..selection import choose

    return choose(job, inventory, rank=rank, from_file=from_file, values=values,
                  transistor=transistor, stage=stage)


def export(
    job_file: JobArg,
    inventory: InventoryOpt,
    netlist: Annotated[Path | None, typer.Option(
        "--netlist", "-n", dir_okay=False, help="Write the SPICE netlist here ('-': stdout).")]
    = None,
    pick_list: Annotated[Path | None, typer.Option(
        "--pick-list", dir_okay=False, help="Write the pick list for the build (CSV).")] = None,
    rank: RankOpt = None,
    from_file: FromOpt = None,
    values: ValuesOpt = None,
    transistor: TransistorOpt = None,
    stage: BenchStageOpt = None,
    json_out: JsonOpt = False,
    accept_changed: AcceptChangedOpt = False,
    force: ForceOpt = False,
) -> None:
    """Export the chosen stage: a SPICE netlist to verify it, a pick list to build it."""
    from ..outputs import OutputSet
    from ..render.console import make_console
    from ..render.json_out import dumps
    from ..render.netlist import export_netlist
    from ..render.pick_list import render_pick_list, write_pick_list
    from ..selection import (
        bench_needs,
        check_inputs,
        failing_summary,
        pick_stage,
        resolve_selection,
        verify_selection,
    )

    if netlist is None and pick_list is None:
        raise InputError("say what to export: --netlist OUT.cir and/or --pick-list OUT.csv",
                         column="--netlist")
    if json_out and netlist is not None and str(netlist) == "-":
        raise InputError("--json and --netlist - both want stdout; write the netlist to a "
                         "file", column="--netlist", text="-")
    outs = OutputSet({"the job file": job_file, "the stock file (--inventory)": inventory,
                      "the saved result (--from)": from_file}, force=force)
    outs.file("--netlist", netlist)
    outs.file("--pick-list", pick_list)
    with outs:
        job, inv = load(job_file, inventory)
        assert inv is not None
        job = pick_stage(job, stage, "export")
        sel = select(job, inv, rank, from_file, values, transistor, stage)
        changed = check_inputs(sel, job_file, inventory, accept_changed=accept_changed)
        if changed:
            verdict = verify_selection(job, sel, inv)
            if not verdict.ok:
                raise UnmetError(f"{sel.source} fails the job with the current files "
                                 f"({', '.join(changed)} changed): "
                                 f"{failing_summary(verdict)}; nothing written")
        job = sel.job_for(job)
        parts, t = resolve_selection(job, sel, inv)
        payload: dict[str, object] = {"selection": sel.to_dict()}
        if changed:
            payload["reverified"] = {"changed": changed, "ok": True}
        exported = None
        if netlist is not None:
            exported = export_netlist(job, parts, t, topology=sel.topology, source=sel.source)
            if str(netlist) != "-":
                outs.write_text("--netlist", exported.text)
        needs = bench_needs(parts, t, job.build.quantity) if pick_list is not None else []
        if pick_list is not None:
            with outs.writing("--pick-list") as tmp:
                write_pick_list(tmp, needs)
        outs.commit()
    console = make_console(stderr=netlist is not None and str(netlist) == "-")
    if changed and not json_out:
        make_console(stderr=True).print(f"Note: {', '.join(changed)} changed since the "
                                        f"result was saved; {sel.source} re-verified "
                                        "against the current files: it meets the job.",
                                        markup=False)
    if exported is not None:
        if str(netlist) == "-":
            typer.echo(exported.text, nl=False)
        payload["netlist"] = {"file": None if str(netlist) == "-" else str(netlist),
                              "model_card": exported.card, "temperature_c":
                              exported.temperature_c, "expected": exported.expected,
                              "sweep_c": exported.sweep_c}
        if not json_out:
            sweep = "" if exported.sweep_c is None else (
                f" and a TEMP sweep {exported.sweep_c[0]:g}…{exported.sweep_c[1]:g} °C")
            where = "stdout" if str(netlist) == "-" else str(netlist)
            which = "" if stage is None else f"stage '{job.stage.name}', "
            console.print(f"Netlist written to {where}: {which}{sel.topology}, {t.polarity} "
                          f"{t.part_id}, .op at {exported.temperature_c:g} °C{sweep}; "
                          f"expected IC {format_quantity(exported.expected['ic'], 'A')}, "
                          f"VCE {format_quantity(exported.expected['vce'], 'V')} "
                          "(exponential model)", markup=False)
    if pick_list is not None:
        payload["pick_list"] = {"file": str(pick_list), "build_quantity": job.build.quantity,
                                "lines": [n.to_dict() for n in needs]}
        if not json_out:
            render_pick_list(console, needs, job.build.quantity)
            console.print(f"Pick list written to {pick_list}", markup=False)
    if json_out:
        typer.echo(dumps(payload))
