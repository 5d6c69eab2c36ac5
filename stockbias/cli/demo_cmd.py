"""`stockbias demo`: the main job on a bundled shelf and job."""

from __future__ import annotations


def demo() -> None:
    """Design a line-driver stage from the bundled workshop drawers and show the ranking."""
    from ..job import load_job
    from ..render.console import make_console
    from ..render.design_table import render_design
    from ..samples import sample_path
    from ..search.defaults import with_design_defaults
    from ..search.design import design
    from ..stock_io import read_inventory

    console = make_console()
    shelf = sample_path("workshop_drawers.csv")
    job_path = sample_path("line_driver_job.toml")
    inv = read_inventory(shelf)
    job, assumed = with_design_defaults(load_job(job_path))
    console.rule("stockbias demo")
    console.print(f"Shelf: {shelf.name} ({len(inv.resistors)} resistor lines, "
                  f"{len(inv.transistors)} transistors); job: {job_path.name}")
    console.print(f"Equivalent command: stockbias design inventory_samples/{job_path.name} "
                  f"--inventory inventory_samples/{shelf.name}")
    result = design(job, inv)
    result.assumptions[:0] = assumed
    render_design(console, job, result)
    if result.designs:
        from ..render.check_table import purpose_rows
        from ..selection import from_design

        first = result.designs[0].check
        if first.purpose is not None:
            said = "; ".join(f"{r['figure']} {r['nominal']}"
                             f"{' V/V' if r['unit'] == 'V/V' else ''} nominal, "
                             f"{r['worst']}{' V/V' if r['unit'] == 'V/V' else ''} worst case"
                             for r in purpose_rows(first))
            console.print(f"What rank 1 does ({first.purpose.conditions}): {said}")

        best = from_design(result.designs[0].to_dict(), "demo rank 1")
        console.print("Next: the full worst-case report of the best design: "
                      f"stockbias check inventory_samples/{job_path.name} --inventory "
                      f"inventory_samples/{shelf.name} --values {best.assignment_text()} "
                      f"--transistor {best.transistor_id}")
    console.print("A whole board: the bundled four-stage board onto fewer drawer lines, every "
                  "stage still in spec: stockbias consolidate "
                  "inventory_samples/distribution_amp_board.toml --inventory "
                  f"inventory_samples/{shelf.name}")
