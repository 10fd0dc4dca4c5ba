"""`lowgmap sweep`: sweep case inputs over ranges; regime, symmetric margin and limiting line per design.

The SWEEP file is read by :func:`lowgmap.app.files.studyfiles.read_sweep` (its format is described
there); the designs are evaluated by :func:`lowgmap.physics.studies.sweep.sweep`, in this process or on
a dask cluster (``--workers``, ``--scheduler``). ``-o`` writes every design to CSV or Parquet, ``--plot``
draws a margin map (:func:`lowgmap.app.outputs.maps.margin_map_figure`); both paths are checked before
the sweep runs (:func:`lowgmap.app.cli.common.check_output`), an existing file is replaced only with
``--force``, and both are written atomically. Before the designs run, the time of the first two is
measured and an estimate printed on stderr (``--quiet`` leaves it out). A scheduler that does not
answer within :data:`lowgmap.app.cli.common.SCHEDULER_TIMEOUT` seconds ends the command with a message.
"""
from __future__ import annotations

import contextlib
import io
import time
from pathlib import Path

from lowgmap.app import CAUTION
from lowgmap.app.cli.common import clean, emit, load_case_file
from lowgmap.app.cli.studies import Progress, format_value, pilot_seconds, plain, print_estimate
from lowgmap.app.cli import common

__all__ = ["add_arguments", "run", "cluster", "display_table", "TABLE_FORMATS", "PLOT_FORMATS"]

#: Suffixes of ``-o`` and ``--plot``.
TABLE_FORMATS = (".csv", ".parquet", ".pq")
PLOT_FORMATS = (".png", ".svg", ".pdf")


def add_arguments(parser) -> None:
    parser.add_argument("sweep", metavar="SWEEP", help="sweep file (.toml): variables, envelope, options")
    parser.add_argument("-o", "--output", metavar="FILE", help="write every design to .csv or .parquet")
    parser.add_argument("--plot", metavar="FILE", help="margin map over the first two variables (.png, .svg, .pdf)")
    parser.add_argument("--force", action="store_true", help="replace the -o and --plot files if they exist")
    grp = parser.add_mutually_exclusive_group()
    grp.add_argument("--workers", type=int, metavar="N",
                     help=f"run on a local dask cluster of N worker processes (1 to {common.MAX_WORKERS})")
    grp.add_argument("--scheduler", metavar="ADDR", help="run on the dask scheduler at ADDR (tcp://host:8786)")
    parser.add_argument("--quiet", action="store_true", help="no progress and no run-time estimate on stderr")


def run(args) -> int:
    from lowgmap.physics.studies.sweep import sweep
    from lowgmap.physics.studies.uncertainty import Uncertainty

    from lowgmap.app.files.studyfiles import fluid_spec, read_sweep

    if args.workers is not None and args.scheduler:
        raise common.CliError("give --workers or --scheduler, not both")
    if args.workers is not None:
        common.check_count("--workers", args.workers, 1, common.MAX_WORKERS)
    inputs = (args.case, args.sweep)
    if args.output is not None:
        common.check_output(args.output, option="-o", formats=TABLE_FORMATS, force=args.force, inputs=inputs,
                            formats_text=".csv or .parquet")
        if Path(args.output).suffix.lower() != ".csv":
            import importlib.util

            if importlib.util.find_spec("pyarrow") is None:
                raise common.CliError("writing Parquet needs pyarrow (pip install pyarrow); or write .csv")
    if args.plot is not None:
        common.check_output(args.plot, option="--plot", formats=PLOT_FORMATS, force=args.force, inputs=inputs,
                            outputs=(args.output,))
    doc = load_case_file(args.case)
    plan = read_sweep(args.sweep, doc)
    if args.plot is not None and not [n for n in plan.variables if plan.kinds[n] != "name"]:
        raise common.CliError("--plot needs a numeric sweep variable")
    progress = None if args.quiet else Progress(f"sweep {Path(args.sweep).name}")
    uncs = [Uncertainty.of(u) for u in doc.uncertainties] if plan.mc_samples else ()
    spec = dict(envelope=plan.envelope, regime=plan.regime, required_margin=plan.required_margin,
                fluid_spec=fluid_spec(doc), uncertainties=tuple(uncs), mc_samples=plan.mc_samples, seed=plan.seed,
                method=plan.method)
    if not args.quiet and plan.designs:
        with common.input_errors("sweep"):
            first, each = pilot_seconds(doc.case, plan.designs, spec)
        print_estimate(len(plan.designs), "designs", first, each, parallel=args.workers or 1)
    t0 = time.perf_counter()
    with cluster(args.workers, args.scheduler) as client, common.input_errors("sweep"):
        df = sweep(doc.case, plan.designs, client=client, chunk_size=plan.chunk_size, progress=progress, **spec)
    elapsed = time.perf_counter() - t0
    backend = (f"dask scheduler {args.scheduler}" if args.scheduler else
               f"local dask cluster, {args.workers} workers" if args.workers else "in-process")
    table = display_table(df, plan)
    if args.output is not None:
        _write_table(table, Path(args.output), force=args.force)
    if args.plot is not None:
        _write_plot(df, plan, args.plot, doc, force=args.force)
    col = "envelope_margin" if plan.envelope is not None else "margin"
    ok = df[df["status"] == "ok"]
    best = ok.loc[ok[col].idxmax()] if len(ok) and ok[col].notna().any() else None
    summary = {"case": args.case, "sweep": args.sweep, "designs": int(len(df)), "valid": int(len(ok)),
               "backend": backend, "seconds": elapsed, "designs_per_second": len(df) / elapsed if elapsed else None,
               "required_margin": plan.required_margin, "regime": plan.regime,
               "meets_required": int(df["meets_required"].sum()) if "meets_required" in df else None,
               "output": args.output, "plot": args.plot, "units": {n: plan.units[n] for n in plan.variables},
               "best": None if best is None else {k: plain(best[k]) for k in df.columns},
               "caution": CAUTION}
    if args.json:
        summary["rows"] = [{k: plain(v) for k, v in r.items()} for r in df.to_dict(orient="records")]
    lines = [f"{doc.case.title}: {len(df)} designs ({len(ok)} valid), {backend}, {elapsed:.2f} s "
             f"({len(df) / max(elapsed, 1e-9):.0f} designs/s)"]
    if plan.required_margin is not None and "meets_required" in df:
        lines.append(f"  {int(df['meets_required'].sum())} meet the required margin "
                     f"±{100 * plan.required_margin:.0f} %" + (f" in {plan.regime}" if plan.regime else ""))
    if best is not None:
        desc = ", ".join(format_value(best[n], plan.kinds[n], plan.units[n]) + f" {n}" for n in plan.variables)
        lines.append(f"  best: {desc} -> {col.replace('_', ' ')} ±{100 * best[col]:.1f} %"
                     + (f", limited by {best['envelope_limiting' if col == 'envelope_margin' else 'limiting']}"
                        if best['envelope_limiting' if col == 'envelope_margin' else 'limiting'] else ""))
    bad = df[df["status"] != "ok"]
    if len(bad):
        lines.append(f"  {len(bad)} designs could not be evaluated, e.g. design {int(bad.iloc[0]['design'])}: "
                     f"{bad.iloc[0]['status']}")
    lines.append("")
    lines.append(_text_table(table, 12))
    if args.output is not None:
        lines.append(f"\nwrote {args.output}")
    if args.plot is not None:
        lines.append(f"wrote {args.plot}")
    lines += ["", CAUTION]
    emit(args, clean(summary), "\n".join(lines))
    return 0


@contextlib.contextmanager
def cluster(workers: int | None = None, scheduler: str | None = None):
    """A dask client: a local cluster of ``workers`` processes, or the scheduler at ``scheduler``.

    Yields None when neither is given (in-process). The cluster and client are closed on exit.
    ``workers`` must be within [1, :data:`lowgmap.app.cli.common.MAX_WORKERS`]; a scheduler that does
    not answer within :data:`lowgmap.app.cli.common.SCHEDULER_TIMEOUT` seconds is a :class:`CliError`.
    """
    if workers is None and not scheduler:
        yield None
        return
    if workers is not None:
        common.check_count("--workers", workers, 1, common.MAX_WORKERS)
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise common.CliError("--workers/--scheduler need dask.distributed: pip install 'lowgmap[cluster]'") from None
    if scheduler:
        _probe_scheduler(scheduler)
        try:
            client = Client(scheduler, timeout=f"{common.SCHEDULER_TIMEOUT:g}s")
        except (OSError, ValueError, TypeError) as exc:
            raise common.CliError(f"--scheduler {scheduler}: no dask scheduler answered within "
                                  f"{common.SCHEDULER_TIMEOUT:g} s ({' '.join(str(exc).split()) or type(exc).__name__})"
                                  ) from None
        with client:
            yield client
        return
    with LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True, dashboard_address=":0") as lc, \
            Client(lc) as client:
        yield client


def _probe_scheduler(address: str) -> None:
    """A quick TCP connection to a ``tcp://host:port`` scheduler, so that a closed port fails at once."""
    import socket
    from urllib.parse import urlsplit

    if "://" not in address:
        address = "tcp://" + address
    parts = urlsplit(address)
    if parts.scheme not in ("tcp", "tls"):
        return                                          # inproc://, ucx://...: left to dask
    try:
        host, port = parts.hostname, parts.port
    except ValueError:
        host = port = None
    if not host or not port:
        raise common.CliError(f"--scheduler must be an address such as tcp://host:8786, got {address!r}")
    try:
        with socket.create_connection((host, port), timeout=common.SCHEDULER_TIMEOUT):
            pass
    except OSError as exc:
        why = "timed out" if isinstance(exc, TimeoutError) else (exc.strerror or str(exc))
        raise common.CliError(f"--scheduler {address}: no dask scheduler answers there ({why})") from None


def display_table(df, plan):
    """The result table with the varied inputs in their display units and unit-labelled headers.

    ``plan`` is the :class:`lowgmap.app.files.studyfiles.SweepPlan` the designs came from.
    """
    from lowgmap.app.files.studyfiles import to_display

    out = df.copy()
    rename = {}
    for name in plan.variables:
        kind, unit = plan.kinds[name], plan.units[name]
        if kind != "name":
            out[name] = to_display(out[name].to_numpy(dtype=float), kind, unit)
            rename[name] = f"{name} [{unit}]"
    for col in ("margin", "envelope_margin", "probability", "probability_std_error"):
        if col in out.columns:
            rename[col] = f"{col} [-]"
    out.attrs = dict(df.attrs)
    return out.rename(columns=rename)


def _text_table(table, n: int) -> str:
    import pandas as pd

    show = table.drop(columns=[c for c in ("method",) if c in table.columns])
    if "status" in show.columns:
        show = show.assign(status=show["status"].astype(str).map(lambda t: t if len(t) <= 40 else t[:39] + "…"))
    with pd.option_context("display.max_columns", 30, "display.width", 160, "display.precision", 4):
        text = show.head(n).to_string(index=False)
    more = len(table) - n
    return text + (f"\n... {more} more rows (write them with -o FILE)" if more > 0 else "")


def _write_table(table, path: Path, *, force: bool = False) -> None:
    """The result table as CSV or Parquet, written atomically (an existing file only with ``force``)."""
    suffix = path.suffix.lower()
    if suffix == ".csv":
        data = table.to_csv(index=False)
    elif suffix in (".parquet", ".pq"):
        buf = io.BytesIO()
        try:
            table.to_parquet(buf, index=False)
        except ImportError:
            raise common.CliError("writing Parquet needs pyarrow (pip install pyarrow); or write .csv") from None
        data = buf.getvalue()
    else:
        raise common.CliError(f"-o must end in .csv or .parquet, got {path.name!r}")
    common.write_output(path, data, force=force, option="-o")


def _write_plot(df, plan, target: str, doc, *, force: bool = False) -> None:
    """The margin map over the first one or two numeric variables, written atomically (PNG at 300 dpi)."""
    from lowgmap.physics.studies.design import nominal_design_value

    from lowgmap.app.outputs.maps import figure_file_bytes, margin_map_figure

    p = Path(target)
    if p.suffix.lower() not in (".png", ".svg", ".pdf"):
        raise common.CliError(f"--plot must end in .png, .svg or .pdf, got {target!r}")
    num = [n for n in plan.variables if plan.kinds[n] != "name"]
    if not num:
        raise common.CliError("--plot needs a numeric sweep variable")
    xvar = num[0]
    yvar = num[1] if len(num) > 1 else None
    col = "envelope_margin" if plan.envelope is not None else "margin"
    base = (nominal_design_value(doc.case, xvar), nominal_design_value(doc.case, yvar) if yvar else None)
    fig = margin_map_figure(df, xvar, yvar, column=col, required=plan.required_margin, kinds=plan.kinds,
                            units=plan.units, log=(plan.spacing.get(xvar) == "log",
                                                   plan.spacing.get(yvar) == "log" if yvar else False),
                            title=f"{doc.case.title}", base=base if yvar else None)
    # 300 dpi PNG with the caution line and the version (the export settings of every chart)
    common.write_output(p, figure_file_bytes(fig, p.suffix.lstrip(".").lower()), force=force, option="--plot")
