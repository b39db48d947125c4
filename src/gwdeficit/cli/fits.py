"""``gwdeficit fits``: list the registry of remnant fits."""

from __future__ import annotations

from gwdeficit.cli import _common


def fit_rows() -> list[dict]:
    """One dict per registered fit: name, quantity, paper, calibrated range, default."""
    from gwdeficit.fits.registry import REGISTRY

    return [
        {
            "name": f.name,
            "quantity": f.quantity,
            "paper": f.citation,
            "calibrated": f.calibrated_range,
            "calibrated_text": f.describe_range(),
            "in_default": f.in_default,
            "summary": f.summary,
        }
        for f in REGISTRY
    ]


@_common.handles_errors
def fits(as_json: _common.JsonOpt = False) -> None:
    """List the remnant fits: name, quantity, paper, calibrated range, in the default or not.

    The default estimate of each quantity is the mean of its NR-calibrated fits ("yes");
    parameter-free estimates ("no") are kept as per-fit columns only.
    """
    rows = fit_rows()
    if as_json:
        _common.print_json(rows)
        return
    from rich.console import Console
    from rich.table import Table

    table = Table(title="Remnant fits (q = m2/m1 <= 1; chi = spin magnitude)")
    table.add_column("name", no_wrap=True)
    table.add_column("quantity", no_wrap=True)
    table.add_column("paper", overflow="fold")
    table.add_column("calibrated range", no_wrap=True)
    table.add_column("default", no_wrap=True)
    for r in rows:
        table.add_row(
            r["name"],
            r["quantity"],
            r["paper"],
            r["calibrated_text"],
            "yes" if r["in_default"] else "no",
        )
    console = Console()
    if console.width < 120:  # pipes and test runners report 80 columns
        console = Console(width=120)
    console.print(table)
