"""The demo: the whole chain on the bundled, invented data, exactly as a user would run it.

:func:`run_demo` runs the real commands of the tool one after the other into a fresh working
folder (default ``./gwdeficit-demo``), printing each command line and its output:

    gwdeficit ingest <data>/campaign.csv --on-bad skip   -> catalogue.parquet, rejects.csv
    gwdeficit remnant                                    -> remnants.parquet
    gwdeficit rate --volume mw,gpc3,cosmic:8 --rate ...  -> rates.parquet
    gwdeficit cosmic --rate ...                          -> cosmic.parquet, one figure
    gwdeficit plot                                       -> the other figures/*.png

Nothing is canned: every number comes from the stages' own code on the bundled files. The data
(an invented observing campaign, a weighted synthetic population and one neutron-star event)
are described in ``data_demo/README.md`` of the repository and ship inside the package
(:func:`demo_data_dir`). The rate used is a stated demo assumption (:data:`DEMO_RATE`), not a
measurement.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from gwdeficit.schema import OutputExistsError

DEFAULT_DEMO_WORKDIR = "gwdeficit-demo"
DEMO_FILES = ("campaign.csv", "population.parquet", "ns_event.csv")

#: The demo's stated rate assumption for its binary black holes: median 25 Gpc^-3 yr^-1 with a
#: 90% range of 15..40 at z = 0.2, evolving like the Madau & Dickinson 2014 star-formation
#: history (ARA&A 52, 415, eq. 15; no delay time). A round demo value of the order of published
#: local rates; it is an assumption of the demo, not a measurement.
DEMO_RATE = "25 +15 -10"
DEMO_RATE_Z = 0.2
DEMO_EVOLUTION = "madau-dickinson"
#: The cosmic volume stops at z = 8, the end of the range Madau & Dickinson fitted.
DEMO_VOLUMES = ("mw", "gpc3", "cosmic:8")
#: Escape speeds (km/s) for the retained fraction and the kick figure; sources in
#: :data:`gwdeficit.figures.DEFAULT_ESCAPE_SPEEDS`.
DEMO_ESCAPE_SPEEDS = (50.0, 544.0)
DEMO_SEED = 0

#: What each output of the demo's working folder holds.
OUTPUT_DESCRIPTIONS: dict[str, str] = {
    "catalogue.parquet": "canonical catalogue of the accepted rows (ingest)",
    "rejects.csv": "rejected input rows, each with its reason (ingest)",
    "remnants.parquet": "per-row remnant mass, spin, radiated energy, kick, fit spread (remnant)",
    "rates.parquet": "tidy mass-loss budget per volume with 68/90% intervals and shares (rate)",
    "cosmic.parquet": "energy density, Omega_gw and mass-density history to z = 8 (cosmic)",
    "figures": "PNG figures (plot; cosmic_mass_loss.png from cosmic)",
}


class DemoStageError(RuntimeError):
    """A stage of the demo failed on the bundled data: a bug in gwdeficit (exit code 1)."""


@dataclass(frozen=True)
class DemoStep:
    """One command of the demo: its name and its arguments after ``gwdeficit``."""

    name: str
    args: tuple[str, ...]

    def command_line(self) -> str:
        """The command as a user would type it (arguments with spaces are quoted)."""
        return " ".join(["gwdeficit", *(_quote(a) for a in self.args)])


@dataclass(frozen=True)
class DemoReport:
    """Where everything went: the working folder, the steps run, and the files written."""

    workdir: Path
    steps: tuple[DemoStep, ...]
    outputs: tuple[Path, ...]


def _quote(arg: str) -> str:
    return f"'{arg}'" if (" " in arg or not arg) else arg


def demo_data_dir() -> Path:
    """Folder of the bundled demo files (inside the installed package)."""
    from importlib import resources

    folder = Path(str(resources.files("gwdeficit") / "data_demo"))
    missing = [f for f in DEMO_FILES if not (folder / f).is_file()]
    if missing:
        raise DemoStageError(
            f"the bundled demo data are missing from {folder}: {', '.join(missing)}; the "
            "installation is incomplete (reinstall gwdeficit)"
        )
    return folder


def demo_steps(workdir: str | os.PathLike[str], force: bool = False) -> list[DemoStep]:
    """The commands the demo runs, in order, writing into ``workdir``."""
    wd = str(workdir)
    extra = ("--force",) if force else ()
    data = demo_data_dir()
    rate_model = (
        "--rate",
        DEMO_RATE,
        "--rate-z",
        f"{DEMO_RATE_Z:g}",
        "--evolution",
        DEMO_EVOLUTION,
    )
    seed = ("--seed", str(DEMO_SEED))
    rate_args = (
        "--volume",
        ",".join(DEMO_VOLUMES),
        *rate_model,
        "--escape-speed",
        ",".join(f"{v:g}" for v in DEMO_ESCAPE_SPEEDS),
        *seed,
    )
    vesc = ",".join(f"{v:g}" for v in DEMO_ESCAPE_SPEEDS)
    return [
        DemoStep(
            "ingest",
            ("ingest", str(data / "campaign.csv"), "--workdir", wd, "--on-bad", "skip", *extra),
        ),
        DemoStep("remnant", ("remnant", "--workdir", wd, *seed, *extra)),
        DemoStep("rate", ("rate", "--workdir", wd, *rate_args, *extra)),
        DemoStep("cosmic", ("cosmic", "--workdir", wd, *rate_model, *seed, *extra)),
        DemoStep("plot", ("plot", "--workdir", wd, "--vesc", vesc, *extra)),
    ]


def _check_fresh(workdir: Path, force: bool) -> None:
    if workdir.exists() and not workdir.is_dir():
        raise OutputExistsError(f"{workdir} exists and is not a folder")
    if workdir.is_dir() and any(workdir.iterdir()) and not force:
        raise OutputExistsError(
            f"{workdir} exists and is not empty; the demo writes into a fresh folder. "
            "Pass --force to overwrite its outputs, or choose another --workdir"
        )


def run_demo(
    workdir: str | os.PathLike[str] | None = None,
    force: bool = False,
    echo: Callable[[str], None] | None = None,
    steps: Sequence[str] | None = None,
) -> DemoReport:
    """Run ingest -> remnant -> rate -> cosmic -> plot on the bundled campaign into ``workdir``.

    ``workdir``: default ``./gwdeficit-demo``; it must be empty or new unless ``force``.
    ``echo``: where the command lines and progress notes go (default: standard output; the
    stages print their own summaries there too). ``steps``: run only these step names (in the
    demo's order). Raises :class:`~gwdeficit.schema.OutputExistsError` for a used folder and
    :class:`DemoStageError` when a stage fails (that is a bug: the bundled data are valid).
    """
    from gwdeficit.cli import _common, app

    say = echo or (lambda text: print(text, flush=True))
    wd = Path(workdir if workdir is not None else DEFAULT_DEMO_WORKDIR).expanduser()
    _check_fresh(wd, force)
    wd.mkdir(parents=True, exist_ok=True)
    plan = demo_steps(wd, force=force)
    if steps is not None:
        unknown = sorted(set(steps) - {s.name for s in plan})
        if unknown:
            from gwdeficit.schema import OptionError

            raise OptionError(f"unknown demo step(s) {', '.join(unknown)}")
        plan = [s for s in plan if s.name in set(steps)]
    say(f"gwdeficit demo: the whole chain on invented demo data, into {wd}")
    say(
        f"demo rate assumption: BBH {DEMO_RATE} Gpc^-3 yr^-1 (median, 90% bounds) at "
        f"z = {DEMO_RATE_Z:g}, evolving like the Madau & Dickinson 2014 star-formation history"
    )
    prefix = ("--debug",) if _common.STATE.debug else ()
    for step in plan:
        say("")
        say(f"$ {step.command_line()}")
        sys.stdout.flush()
        code = app([*prefix, *step.args], standalone_mode=False, prog_name="gwdeficit")
        sys.stdout.flush()
        sys.stderr.flush()
        if code not in (None, 0):
            raise DemoStageError(
                f"demo step '{step.name}' failed with exit code {code} on the bundled data; "
                "this is a bug in gwdeficit (its message is above)"
            )
    outputs = tuple(wd / name for name in OUTPUT_DESCRIPTIONS if (wd / name).exists())
    say("")
    say(f"Everything went into {wd}:")
    for path in outputs:
        say(f"  {path.name + ('/' if path.is_dir() else ''):<20} {OUTPUT_DESCRIPTIONS[path.name]}")
        if path.is_dir():
            for f in sorted(path.iterdir()):
                say(f"    {f.name}")
    say("Numbers are research estimates on invented data; see README.md for methods and ranges.")
    return DemoReport(wd, tuple(plan), outputs)
