"""Command-line interface: parse options, call the library, format the answer.

No science lives here. Every command runs inside :func:`_guard`, which turns a
:class:`~gpctools.errors.GpcError` into a one-line message on stderr and exit code 2, and
any other exception into a short internal-error message and exit code 3 (``--debug``
shows the traceback). A batch with failed injections exits 1 after writing everything.
A closed output pipe (``gpctools diagnose ... | head``) ends the command quietly with
exit code 141 (128 + SIGPIPE, what a shell reports for tools stopped by a closed pipe).

Progress (:func:`_stage`) goes to stderr, only when both stdout and stderr are terminals
and ``--quiet`` is not given, and only for stages that last longer than about a second.
"""

from __future__ import annotations

import functools
import os
import sys
import threading
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any, Optional

import typer

if TYPE_CHECKING:  # pragma: no cover
    from .batch import BatchResult
    from .io.describe import ExportDescription
    from .method import Method

app = typer.Typer(
    add_completion=False,
    rich_markup_mode=None,
    pretty_exceptions_enable=False,
    no_args_is_help=True,
    help="SEC/GPC slice exports to molar-mass averages, chain-transfer constants, diagnosis and QC.",
)

_STATE = {"debug": False, "quiet": False}

EXIT_FAILED_ROWS = 1
EXIT_USER_ERROR = 2
EXIT_INTERNAL = 3
EXIT_CLOSED_PIPE = 141  # 128 + SIGPIPE

#: A stage is shown only when it lasts longer than this [s] (GPCTOOLS_PROGRESS_DELAY
#: overrides it; the tests set 0 so that they need no timing).
PROGRESS_DELAY = 1.0


def _err(text: str) -> None:
    # print(), not typer.echo: while a progress display is up, rich redirects sys.stderr
    # and sys.stdout so that lines appear above it; click resolves its own stream and
    # would write through the display.
    print(text, file=sys.stderr, flush=True)


def _say(text: str = "") -> None:
    """Print one line on stdout; safe while a progress display is up (see :func:`_err`)."""
    print(text, flush=True)


def _show_warning(message, category, filename, lineno, file=None, line=None):  # noqa: ARG001
    _err(f"warning: {message}")


def _guard(func):
    """Run a command: clear messages, no tracebacks, meaningful exit codes."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        from .errors import GpcError

        old = warnings.showwarning
        warnings.showwarning = _show_warning
        try:
            return func(*args, **kwargs)
        except typer.Exit:
            raise
        except BrokenPipeError:  # the reader went away (| head): stop quietly
            _silence_stdout()
            raise typer.Exit(EXIT_CLOSED_PIPE) from None
        except GpcError as exc:
            _err(f"error: {exc}")
            raise typer.Exit(EXIT_USER_ERROR) from None
        except OSError as exc:  # missing, unreadable or unwritable paths are user errors
            _err(f"error: {exc.filename or ''}: {exc.strerror or exc}; check the path "
                 "(inputs must be readable files, --out a writable folder)")
            raise typer.Exit(EXIT_USER_ERROR) from None
        except KeyboardInterrupt:
            _err("interrupted")
            raise typer.Exit(130) from None
        except Exception as exc:  # pragma: no cover - last resort
            if _STATE["debug"]:
                raise
            _err(f"internal error: {type(exc).__name__}: {exc} (run with --debug for details)")
            raise typer.Exit(EXIT_INTERNAL) from None
        finally:
            warnings.showwarning = old

    return wrapper


def _silence_stdout() -> None:
    """Point stdout at the null device after its reader went away.

    Python flushes stdout at exit; without this, that flush fails again and prints
    "Exception ignored ... BrokenPipeError" (the recipe of the Python documentation,
    "Note on SIGPIPE"). Does nothing when stdout has no file descriptor (test runners).
    """
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):
        pass


def _version(value: bool) -> None:
    if value:
        from . import __version__

        typer.echo(f"gpctools {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    debug: bool = typer.Option(False, "--debug", help="Show tracebacks of internal errors."),
    quiet: bool = typer.Option(False, "--quiet", "-q", help="No progress display (it is shown only on a terminal anyway)."),
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                 help="Print the version and exit."),
) -> None:
    _STATE["debug"] = debug
    _STATE["quiet"] = quiet


def _check_out(out: Path) -> None:
    """Refuse an output folder that is a file or lies under a file, before any work."""
    from .errors import InputFormatError

    for p in (out, *out.parents):
        if p.exists():
            if not p.is_dir():
                what = "is a file" if p == out else f"lies under {p}, which is a file"
                raise InputFormatError(f"the output folder {what}; give a folder with --out "
                                       "(it is created when missing)", path=out, key="--out")
            if not os.access(p, os.W_OK | os.X_OK):
                raise InputFormatError(f"cannot write in {p}; give a writable folder with --out",
                                       path=out, key="--out")
            return


def _progress_shown() -> bool:
    """Progress goes to a terminal only: never into files, pipes or with --quiet."""
    if _STATE["quiet"]:
        return False
    try:
        return sys.stdout.isatty() and sys.stderr.isatty()
    except (AttributeError, ValueError):
        return False


def _progress_delay() -> float:
    try:
        return max(0.0, float(os.environ.get("GPCTOOLS_PROGRESS_DELAY", PROGRESS_DELAY)))
    except ValueError:
        return PROGRESS_DELAY


def _ignore_progress(done: int, total: int) -> None:  # noqa: ARG001
    pass


@contextmanager
def _stage(label: str) -> Iterator[Callable[[int, int], None]]:
    """Show ``label`` on stderr while the block runs, if it runs longer than about a second.

    Yields ``advance(done, total)``: once called, the bar fills and counts ``done/total``;
    otherwise it pulses. The elapsed time is shown either way. The display is transient
    (it leaves no line behind) and appears only on a terminal (:func:`_progress_shown`).
    rich comes with typer.
    """
    if not _progress_shown():
        yield _ignore_progress
        return
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        Progress,
        ProgressColumn,
        SpinnerColumn,
        TextColumn,
        TimeElapsedColumn,
    )
    from rich.text import Text

    class _Count(ProgressColumn):
        def render(self, task: Any) -> Text:
            return Text(f"{int(task.completed)}/{int(task.total)}" if task.total else "")

    prog = Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(), _Count(), TimeElapsedColumn(),
                    console=Console(stderr=True), transient=True)
    task = prog.add_task(label, total=None)
    lock = threading.Lock()
    state = {"shown": False, "done": False}

    def show() -> None:
        with lock:
            if not state["done"]:
                state["shown"] = True
                prog.start()

    def advance(done: int, total: int) -> None:
        prog.update(task, completed=done, total=total)

    timer = threading.Timer(_progress_delay(), show)
    timer.daemon = True
    timer.start()
    try:
        yield advance
    finally:
        timer.cancel()
        with lock:
            state["done"] = True
            if state["shown"]:
                prog.stop()


def _fmt(v, column: str = "") -> str:
    """A table cell for the terminal, by the policy of :mod:`gpctools.formatting`
    (digits per quantity from the column's name and unit; text stays text).
    """
    from .formatting import number

    if isinstance(v, str):
        return v
    return number(v, column)


def _print_table(rows: list[dict], columns: list[str]) -> None:
    widths = {c: max(len(c), *(len(_fmt(r.get(c, ""), c)) for r in rows)) if rows else len(c) for c in columns}
    typer.echo("  ".join(c.ljust(widths[c]) for c in columns))
    for r in rows:
        typer.echo("  ".join(_fmt(r.get(c, ""), c).rjust(widths[c]) if not isinstance(r.get(c, ""), str)
                             else _fmt(r.get(c, ""), c).ljust(widths[c]) for c in columns))


def _run_batch_with_progress(sheet: Path, method: Method | None, out: Path, workers: int | None,
                             sheet_name: str | None = None, injection_tables: bool = False, *,
                             review: bool = True, review_limit: int | None = 100) -> BatchResult:
    """Run the batch streaming its outputs: the long-form distributions table is written
    in this process as rows arrive, per-injection tables (opt-in) and the review page's
    fragments by the workers; no injection's traces are kept, so memory does not grow
    with the batch.
    """
    from .batch import run_batch
    from .report import DistributionsTable, DistributionWriter, write_batch
    from .report.batch import Sinks

    sinks: list[Any] = [DistributionWriter(out / "distributions")] if injection_tables else []
    if review:
        import shutil

        from .report.review import PARTS, ReviewSink, review_rows

        shutil.rmtree(out / PARTS, ignore_errors=True)  # fragments of an interrupted earlier run
        sinks.append(ReviewSink(out / PARTS, review_rows(sheet, review_limit, sheet_name=sheet_name)))
    sink = None if not sinks else sinks[0] if len(sinks) == 1 else Sinks(tuple(sinks))
    with _stage("injections") as advance, DistributionsTable(out / "distributions.csv") as curves:
        result = run_batch(sheet, method, sheet=sheet_name, workers=workers, progress=advance,
                           keep_distributions=False, on_result=sink, on_curve=curves)
    write_batch(result, out, distributions=False, curves=False)  # both were written while running
    if review:
        from .report.review import write_review

        write_review(result, out, limit=review_limit)
    return result


SUMMARY_COLUMNS = ["sample_id", "status", "Mn [g/mol]", "Mw [g/mol]", "Mp [g/mol]", "dispersity [-]",
                   "outside calibration [% mass]"]


@app.command("batch")
@_guard
def batch_cmd(
    sheet: Path = typer.Argument(..., help="Batch sheet (CSV or XLSX): sample_id, file, optional role, "
                                 "method file, overrides and metadata."),
    method: Optional[Path] = typer.Option(None, "--method", "-m", help="Method file (TOML) for the rows "
                                          "whose 'method file' cell is blank; optional when every row names one."),
    out: Path = typer.Option(Path("gpctools-out"), "--out", "-o", help="Output folder."),
    workers: int = typer.Option(0, "--workers", "-j", min=0, help="Processes to use (0 = one per core for 16 or more injections)."),
    sheet_name: Optional[str] = typer.Option(None, "--sheet", help="Workbook sheet of the batch sheet."),
    review: bool = typer.Option(True, "--review/--no-review", help="Write review.html: each injection's "
                                "trace, baseline, limits and distribution, overlays and the calibration."),
    review_all: bool = typer.Option(False, "--review-all", help="Draw every injection on review.html "
                                    "(default: the first 100, the rest listed)."),
    injection_tables: bool = typer.Option(False, "--injection-tables", help="Also write distributions/<sample>_row<n>.csv, "
                                          "the slice-by-slice distribution table of every injection (distributions.csv, "
                                          "one long-form table binned in log M, is always written)."),
) -> None:
    """Process every injection of a batch sheet and write the results table.

    One sheet can name a method per row ('method file' column) and override the
    integration limits (in mL or g/mol) and baseline windows per row; see
    templates/batch.csv.
    """
    from .method import load_method

    _check_out(out)
    m = load_method(method) if method is not None else None
    from .report.review import DEFAULT_LIMIT

    result = _run_batch_with_progress(sheet, m, out, workers or None, sheet_name, injection_tables,
                                      review=review, review_limit=None if review_all else DEFAULT_LIMIT)
    rows = result.table.to_dict("records")
    _print_table(rows, SUMMARY_COLUMNS)
    if len(result.methods) > 1:
        typer.echo("")
        for label, used in result.methods.items():
            typer.echo(f"method {label}: molar-mass scale {used.calibration.scale_label()}")
    else:
        typer.echo(f"\nmolar-mass scale: {result.method.calibration.scale_label()}")
    if any(used.detectors is not None for used in result.methods.values()):
        from . import columns as C

        typer.echo("")
        shown = [c for c in (C.SAMPLE_ID, C.STATUS, C.MN_LS, C.MW_LS, C.MW_LS_AREAS, C.DISPERSITY_LS, C.RG_Z,
                             C.INTRINSIC_VISCOSITY, C.MH_A, C.DETECTOR_SCALE) if c in result.table.columns]
        _print_table(rows, shown)
    typer.echo(f"wrote {out}/results.csv, results.xlsx, calibration.csv, manifest.json, distributions.csv"
               + (", distributions/" if injection_tables else "") + (", review.html" if review else ""))
    if result.failed:
        for r in rows:
            if r["status"] == "error":
                _err(f"failed: {r['sample_id']}: {r['error']}")
        _err(f"{result.failed} of {len(rows)} injections failed")
        raise typer.Exit(EXIT_FAILED_ROWS)


@app.command("qc")
@_guard
def qc_cmd(
    sheet: Path = typer.Argument(..., help="Batch sheet (with --method), or a results.csv written by 'gpctools batch'."),
    specs: Path = typer.Option(..., "--specs", "-s", help="Spec-limits sheet (CSV or XLSX, wide or long form), start from `gpctools template spec_limits.csv` (wide) or spec_limits_long.csv."),
    method: Optional[Path] = typer.Option(None, "--method", "-m", help="Method file (TOML); processes the sequence first."),
    settings_file: Optional[Path] = typer.Option(None, "--settings", help="QC settings file (TOML or a setting/value sheet), start from `gpctools template qc_settings.toml`."),
    history: Optional[list[str]] = typer.Option(None, "--history", help="Earlier results for the control charts: a file, a folder or a quoted glob such as 'old/*.csv' (repeatable, oldest first)."),
    out: Path = typer.Option(Path("gpctools-qc"), "--out", "-o", help="Output folder."),
    strict: bool = typer.Option(False, "--strict", help="Exit 1 when any batch is not 'pass' (fail, not reportable, no result, no spec)."),
    require_check: bool = typer.Option(True, "--require-check-standard/--no-require-check-standard",
                                       help="A sequence without a check standard fails system suitability."),
    workers: int = typer.Option(0, "--workers", "-j", min=0, help="Processes for the batch (0 = automatic)."),
    sheet_name: Optional[str] = typer.Option(None, "--sheet", help="Workbook sheet of the batch sheet."),
) -> None:
    """Verdicts per injection and batch, system suitability and control charts; writes qc_report.xlsx/.html."""
    from dataclasses import replace

    from .qc import QCSettings, read_qc_settings, read_specs
    from .report import run_qc
    from .report.qc_report import history_paths

    _check_out(out)
    spec_sheet = read_specs(specs)  # read first: a bad spec sheet fails before the batch runs
    hist = [p for h in (history or []) for p in history_paths(h)]
    m = None
    if method is not None:
        from .method import load_method

        m = load_method(method)
    settings = read_qc_settings(settings_file, method=m) if settings_file else QCSettings.from_method(m)
    if not require_check:
        settings = replace(settings, suitability=replace(settings.suitability, require_check_standard=False))
    results = _run_sequence_with_progress(sheet, m, settings, out, workers or None, sheet_name) if m else sheet
    with _stage("QC: verdicts, system suitability, control charts, report"):
        report = run_qc(results, spec_sheet, out, method=m, history=hist, settings=settings)
    _print_qc(report.result)
    typer.echo(f"wrote {out}/qc_report.xlsx, qc_report.html, plots/, qc_summary.json, audit.json")
    code = report.exit_code(strict=strict)
    if code:
        raise typer.Exit(code)


def _run_sequence_with_progress(sheet: Path, method: Method, settings: Any, out: Path, workers: int | None,
                                sheet_name: str | None = None) -> Any:
    from .qc.sequence import run_sequence
    from .report import DistributionWriter, write_batch

    with _stage("sequence: standards, blanks, injections") as advance:
        run = run_sequence(sheet, method, settings, sheet_name=sheet_name, workers=workers,
                           on_result=DistributionWriter(out / "distributions"), progress=advance)
    write_batch(run, out, distributions=False)
    for w in run.warnings:
        _err(f"warning: {w}")
    return run


def _print_qc(res) -> None:
    """Every verdict and every failed criterion, with its number and limit."""
    typer.echo("batches:")
    for b in res.decisions.batches:
        typer.echo(f"  {b.batch}: {b.decision}"
                   + (f" (against spec: {b.spec_verdict})" if b.decision != b.spec_verdict else ""))
        if b.decision != "pass":
            for r in b.reasons:
                typer.echo(f"    - {r}")
    typer.echo("injections:")
    from .columns import SHEET_ROW

    sheet_rows = res.table[SHEET_ROW].tolist() if SHEET_ROW in res.table.columns else []
    for v in res.decisions.injections:
        row = sheet_rows[v.position] if sheet_rows else None
        where = f"sheet row {int(row)}" if row == row and row is not None else f"results row {v.position + 1}"
        typer.echo(f"  {v.sample_id} ({v.role}, {where}): {v.verdict}")
        if v.verdict != "pass":
            for r in v.reasons:
                typer.echo(f"    - {r}")
    for s in res.suitability:
        typer.echo(f"sequence {s.sequence}: system suitability {'pass' if s.passed else 'FAIL'}")
        for r in s.reasons():
            typer.echo(f"  - {r}")
    for c in res.trends:
        for v in c.violations:
            typer.echo(f"trend {c.group} {c.quantity}: {v.label} breaks {v.rule} ({v.description}, {v.side})")
    if res.trends:
        typer.echo(f"control charts: {res.settings.rule_set_name}; limits frozen on "
                   f"{res.settings.baseline.describe() if res.settings.baseline else 'all points'}")


@app.command("calibrate")
@_guard
def calibrate_cmd(
    method: Path = typer.Argument(..., help="Method file (TOML) with the narrow standards."),
    out: Path = typer.Option(Path("gpctools-out"), "--out", "-o", help="Folder of calibration.png."),
    plot: bool = typer.Option(True, "--plot/--no-plot", help="Write calibration.png (curve above residuals)."),
) -> None:
    """Fit the method's calibration: each standard's residual, the curve's coefficients
    (log10 M against V in mL, with standard errors) and a plot of curve and residuals.
    """
    from . import formatting as F
    from .method import load_method

    m = load_method(method)
    cal = m.calibration
    s = cal.summary()
    _print_table(s["standards_table"], ["standard", "Mp [g/mol]", "volume [mL]", "fitted M [g/mol]", "residual [%]"])
    typer.echo(f"\norder {s['order']}, R^2 = {F.r_squared(s['R^2 [-]'])}, "
               f"worst residual {F.percent(s['worst residual [%]'], sign=True)} %")
    b, se = cal.coefficients_mL()
    typer.echo("curve: log10 M = " + " ".join(
        f"{'+' if k and v >= 0 else '-' if v < 0 else ''}{' ' if k else ''}{F.significant(abs(v) if k else v, 8, keep_zeros=True)}"
        + ("" if k == 0 else " V" if k == 1 else f" V^{k}") for k, v in enumerate(b))
        + "   (V in mL, M in g/mol)")
    width = max(len(F.significant(v, 8, keep_zeros=True)) for v in b)
    for k, (v, e) in enumerate(zip(b, se)):
        unit = "log10(g/mol)" + ("" if k == 0 else "/mL" if k == 1 else f"/mL^{k}")
        typer.echo(f"  b{k} = {F.significant(v, 8, keep_zeros=True):>{width}}  "
                   f"standard error {F.significant(e, 2, keep_zeros=True)}  [{unit}]")
    lo, hi = s["calibrated range [mL]"]
    typer.echo(f"calibrated range {lo:.3f} to {hi:.3f} mL "
               f"({F.molar_mass(s['calibrated range [g/mol]'][0])} to "
               f"{F.molar_mass(s['calibrated range [g/mol]'][1])} g/mol); "
               f"molar-mass scale: {s['molar-mass scale']}")
    top = s["largest standard error of M inside the range [%]"]
    if top == top:  # not NaN
        typer.echo(f"largest standard error of the fitted M inside the range: {F.percent(top)} %")
    for w in s["warnings"]:
        _err(f"warning: {w}")
    if plot:
        from .report.files import write_bytes
        from .report.plots import calibration_figure, png_bytes

        _check_out(out)
        path = write_bytes(out / "calibration.png", png_bytes(calibration_figure(cal)))
        typer.echo(f"wrote {path}")


@app.command("detectors")
@_guard
def detectors_cmd(
    export: Path = typer.Argument(..., help="Slice export of a narrow-standard injection with every detector."),
    method: Path = typer.Option(..., "--method", "-m", help="Method file (TOML) with a [detectors] section."),
    mw: Optional[float] = typer.Option(None, "--mw", help="Certified Mw of the standard [g/mol] (light-scattering constant)."),
    dispersity: float = typer.Option(1.0, "--dispersity", help="Certified dispersity of the standard [-] (polydispersity lead)."),
    mass_mg: Optional[float] = typer.Option(None, "--mass-mg", help="Injected mass of the standard [mg] (RI constant)."),
    intrinsic: Optional[float] = typer.Option(None, "--intrinsic-viscosity", help="[eta] of the standard [dL/g] (viscometer constant)."),
    a: Optional[float] = typer.Option(None, "--a", help="Mark-Houwink a of the standard [-] (viscometer lead; default 0.7)."),
    rg: Optional[float] = typer.Option(None, "--rg", help="Rg of the standard [nm] (P(theta) in the LS constant)."),
    slope: Optional[float] = typer.Option(None, "--slope", help="-d log10 M/dV at the standard's peak [1/mL] "
                                          "(default: from the method's calibration)."),
    normalise: bool = typer.Option(False, "--normalise", help="Also derive the LS angle normalisation (small standards only)."),
    peak_shape: str = typer.Option("gaussian", "--peak-shape", help="Peak model: gaussian (default; the lead "
                                   "is derived for Gaussian peaks), emg (a line with a mixing-cell tail) or auto."),
) -> None:
    """Detector offsets, broadening and constants from a narrow standard, as method-file lines.

    The offset of each detector is the difference of its peak centre from the
    concentration detector's plus the polydispersity lead ln(D)/(ln10 B) (light
    scattering; times a for a viscometer), docs/detectors.md.
    """
    from .batch import process_trace
    from .detectors import NarrowStandard
    from .detectors.pipeline import calibrate_with_standard, setup_toml
    from .errors import MethodError
    from .io import read_chromatogram
    from .method import load_method

    m = load_method(method)
    if m.detectors is None:
        raise MethodError("the method has no [detectors] section: describe the detectors first "
                          "(gpctools template method.toml shows one)", path=str(method), key="detectors")
    chrom = read_chromatogram(export, **m.import_options.as_kwargs(), channels="all")
    V = chrom.to_volume(m.flow_rate)
    res = process_trace(V, chrom.signal, m, sample_id=export.stem, file=str(export))
    std = NarrowStandard(name=export.stem, Mw=mw, dispersity=dispersity,
                         injected_mass=None if mass_mg is None else mass_mg * 1e-3,
                         intrinsic_viscosity=intrinsic, a=a, rg=rg)
    if peak_shape not in ("gaussian", "emg", "auto"):
        raise MethodError(f"--peak-shape must be gaussian, emg or auto, got {peak_shape!r}")
    cal = calibrate_with_standard(chrom, V, res, m, std, B=slope, normalise=normalise, shape=peak_shape)
    rows = []
    for d in cal.detectors:
        rows.append({"detector": d.name, "kind": d.kind, "peak difference [mL]": d.observed_difference,
                     "lead [mL]": d.lead, "offset [mL]": d.offset, "u(offset) [mL]": d.offset_stderr,
                     "sigma [mL]": d.broadening.sigma, "tau [mL]": d.broadening.tau,
                     "constant": d.constant if d.constant is not None else float("nan")})
    _print_table(rows, list(rows[0]))
    _say("\nconstant: RI [signal/RIU], UV [signal per g/mL], light scattering [1/cm per signal unit], "
         "viscometer gain [-]")
    _say(f"lead: ln(D)/(ln10 B) with D = {dispersity:g}, B = {cal.standard.B:.4g} 1/mL "
         "(docs/detectors.md, calibrating the set-up from one narrow standard)")
    for w in cal.warnings:
        _err(f"warning: {w}")
    _say("\n# paste into the method file (replaces its [detectors] tables; [detectors.analysis] stays):")
    _say(setup_toml(cal.apply(m.detectors.setup), m.detectors.columns).rstrip())


@app.command("inspect")
@_guard
def inspect_cmd(
    file: Path = typer.Argument(..., help="One slice export (CSV, TXT or XLSX)."),
    method: Optional[Path] = typer.Option(None, "--method", "-m", help="Method file (TOML): read with its "
                                          "[import] options and show its volume range and limits."),
    sheet: Optional[str] = typer.Option(None, "--sheet", help="Workbook sheet (name or 0-based index)."),
) -> None:
    """Show how a slice export is read: dialect, every column and its kind, what is used."""
    from .errors import GpcError, InputFormatError
    from .io.describe import describe_export

    m = None
    options: dict = {}
    if method is not None:
        from .method import load_method

        m = load_method(method)
        options = m.import_options.as_kwargs()
    if sheet is not None:
        options["sheet"] = int(sheet) if sheet.isdigit() else sheet
    d = describe_export(file, **options)
    _print_description(d, m)
    if m is not None and m.detectors is not None and d.problem is None and d.signal_column is not None:
        from .detectors.pipeline import assign_columns

        numeric = [c.header for c in d.columns if c.numeric and c.use != "x"]
        try:
            found = assign_columns(m.detectors, numeric, d.signal_column)
        except GpcError as exc:
            _err(f"detectors: {exc.message}")
        else:
            typer.echo("detectors ([detectors] of the method):")
            for name, heads in found.items():
                typer.echo(f"  {name} ({m.detectors.setup[name].kind}): " + ", ".join(repr(h) for h in heads))
    for w in d.warnings:
        _err(f"warning: {w}")
    if d.problem is not None:
        raise InputFormatError(d.problem.removeprefix(f"{file}: ").removeprefix(f"{d.path}: "),
                               path=file)


def _print_description(d: ExportDescription, m: Method | None) -> None:
    """The lines of ``gpctools inspect`` (see :class:`gpctools.io.describe.ExportDescription`)."""
    typer.echo(f"file: {d.path}")
    if d.file_kind == "workbook":
        sheets = ", ".join(repr(s) for s in d.sheets)
        typer.echo(f"kind: workbook, sheet {d.sheet!r}" if d.sheet else "kind: workbook")
        typer.echo(f"sheets: {sheets}")
    else:
        typer.echo(f"kind: text, encoding {d.encoding}")
        if d.separator is not None:
            mark = "decimal comma (,)" if d.decimal == "," else "decimal point (.)"
            sep = {",": "comma (,)", ";": "semicolon (;)"}.get(d.separator, d.separator)
            typer.echo(f"separator: {sep}; decimal mark: {mark}")
    word = "row" if d.file_kind == "workbook" else "line"
    if d.columns or d.problem is None:
        typer.echo(f"header: {word} {d.header_row}" if d.header_row else "header: none (columns numbered from 0)")
    if d.units_row:
        typer.echo(f"units: {word} {d.units_row} (merged into the names)")
    if d.options:
        typer.echo("import options: " + ", ".join(f"{k}={v!r}" for k, v in d.options.items()))
    if d.columns:
        typer.echo("columns:")
        width = max(len(repr(c.header)) for c in d.columns)
        kinds = [c.kind + ("" if c.numeric else " (not numeric)") for c in d.columns]
        kw = max(len(k) for k in kinds)
        for c, k in zip(d.columns, kinds):
            use = {"x": "<- x", "signal": "<- signal"}.get(c.use, "")
            typer.echo(f"  {c.index:>2}  {repr(c.header).ljust(width)}  {k.ljust(kw)}  {use}".rstrip())
    x0, x1 = d.x_first, d.x_last
    if x0 is not None and x1 is not None:
        step = (x1 - x0) / (d.points - 1) if d.points > 1 else float("nan")
        typer.echo(f"x: {d.x_column!r} ({d.x_kind}, {d.x_unit}), {x0:g} to {x1:g} "
                   f"{d.x_unit}, {d.points} slices (mean step {step:.4g} {d.x_unit})")
        typer.echo(f"signal: {d.signal_column!r}")
        if m is not None:
            _print_method_view(d, m, x0, x1)
    if d.metadata:
        typer.echo("metadata:")
        for k, v in d.metadata.items():
            typer.echo(f"  {k}: {v}")


def _print_method_view(d: ExportDescription, m: Method, x0: float, x1: float) -> None:
    """What the method makes of the export (x from x0 to x1): volumes, calibrated range, limits."""
    rate = m.flow_rate
    if d.x_kind == "time":
        if rate is None:
            typer.echo("volume: the method has no flow.rate to turn these times into volumes")
            return
        f = rate / 60.0 if d.x_unit == "s" else rate
        v0, v1 = x0 * f, x1 * f
        typer.echo(f"volume at {rate:g} mL/min: {v0:.4g} to {v1:.4g} mL")
    else:
        v0, v1 = x0, x1
    cal = m.calibration
    typer.echo(f"calibrated range: {cal.v_min:.4g} to {cal.v_max:.4g} mL "
               f"({_fmt(float(cal.M(cal.v_max)), '[g/mol]')} to {_fmt(float(cal.M(cal.v_min)), '[g/mol]')} g/mol)")
    lim = m.volume_limits()
    if lim is None:
        typer.echo("integration limits: automatic")
    else:
        given = (f" (from {_fmt(m.limits_M[0], '[g/mol]')} to {_fmt(m.limits_M[1], '[g/mol]')} g/mol)"
                 if m.limits_M is not None else "")
        inside = "" if v0 <= lim[0] and lim[1] <= v1 else "; not all inside the recorded volumes"
        typer.echo(f"integration limits: {lim[0]:.4g} to {lim[1]:.4g} mL{given}{inside} "
                   "(after the flow-marker correction)")
    if m.exclusions:
        typer.echo("excluded regions: " + ", ".join(f"{a:g} to {b:g} mL" for a, b in m.exclusions))


def _numbers(text: Optional[str], count: tuple[int, ...], option: str) -> Optional[tuple[float, ...]]:
    """Parse "a,b" option values into floats (None when not given)."""
    if text is None:
        return None
    from .errors import DataError

    try:
        vals = tuple(float(v) for v in text.replace(";", ",").split(",") if v.strip())
    except ValueError:
        raise DataError(f"{text!r} is not a comma-separated list of numbers", key=option) from None
    if len(vals) not in count:
        raise DataError(f"give {' or '.join(str(c) for c in count)} number(s), got {text!r}", key=option)
    return vals


TRANSFER_COLUMNS = ["group", "term", "estimator", "model", "C [-]", "standard error [-]",
                    "statistical part [-]", "calibration part [-]", "CI low [-]", "CI high [-]", "runs",
                    "preferred"]


def _dosing_targets(target_Mn: Optional[float], target_Mw: Optional[float],
                    conversion: Optional[float]) -> Optional[dict]:
    """The dosing question of the transfer command (None when not asked)."""
    from .errors import DataError

    if target_Mn is None and target_Mw is None:
        if conversion is not None:
            raise DataError("--conversion is the final conversion of a dosing question: give "
                            "--target-Mn or --target-Mw with it", key="--conversion")
        return None
    if target_Mn is not None and target_Mw is not None:
        raise DataError("give --target-Mn or --target-Mw, not both", key="--target-Mw")
    if conversion is None:
        raise DataError("a dosing question needs the final conversion: --conversion X (0 < X < 1)",
                        key="--conversion")
    return {"target_Mn": target_Mn, "target_Mw": target_Mw, "conversion": conversion}


def _dosing(result, targets: Optional[dict], monomer_conc: Optional[float], confidence: float) -> list:
    """One dosing answer per group that has an agent term."""
    if targets is None:
        return []
    from .transfer.dosing import agent_charge

    return [agent_charge(g, monomer_conc=monomer_conc, confidence=confidence, **targets)
            for g in result.groups if any(t.startswith("C_A") for t in g.terms)]


def _echo_group(g) -> None:
    """Flagged runs, the intercept check, the kinetic term and the estimators' spread."""
    if g.impurity is not None:
        for f in g.impurity.flags:
            if f.flagged:
                typer.echo(f"{g.label}: run {f.run_id} flagged: {f.reason}")
    if g.intercept_check is not None:
        typer.echo(f"{g.label}: {g.intercept_check.message}")
    if g.kinetic is not None and g.kinetic.how != "constant":
        typer.echo(f"{g.label}: {g.kinetic.note}")
    if g.termination is not None and g.termination.delta < 1:
        typer.echo(f"{g.label}: delta = {g.termination.delta:g} ({g.termination.source.split(':')[0]}); "
                   "Mw/2 and CLD use the mixed-termination relations")
    for t, sp in g.spread.items():
        if sp["disagree"]:
            vals = ", ".join(f"{e} {v:.4g}" for e, v in sp["values"].items())
            typer.echo(f"{g.label}: {t} estimators disagree beyond their uncertainties ({vals}); "
                       f"the spread {sp['min']:.4g} to {sp['max']:.4g} is part of the answer")


@app.command("transfer")
@_guard
def transfer_cmd(
    sheet: Path = typer.Argument(..., help="Run-series sheet (CSV or XLSX); start from `gpctools template run_series.csv`."),
    method: Optional[Path] = typer.Option(None, "--method", "-m", help="Method file (TOML) for the chromatograms named in the sheet."),
    out: Path = typer.Option(Path("gpctools-transfer"), "--out", "-o", help="Output folder."),
    terms: Optional[str] = typer.Option(None, "--terms", help="Constants to fit, comma-separated: C_A, C_A:<agent>, C_S, C_I, C_M (default: every ratio that varies)."),
    estimators: str = typer.Option("Mn,Mw/2,CLD", "--estimators", help="Chain-length estimators, comma-separated: Mn, Mw/2, CLD."),
    drift: str = typer.Option("auto", "--drift", help="Conversion-drift model: auto (when conversions are given), yes, no."),
    impurity_C: Optional[float] = typer.Option(None, "--impurity-C", help="Transfer constant of the suspected impurity [-], for ppm and mol/L."),
    impurity_confidence: float = typer.Option(0.99, "--impurity-confidence", min=0.5, max=0.999999, help="One-sided confidence of impurity flags and the intercept check."),
    per_run: bool = typer.Option(False, "--per-run-level", help="Apply the impurity confidence per run instead of to the whole series."),
    rel_error: Optional[float] = typer.Option(None, "--rel-error", help="Known relative standard error of one 1/DPn [-] (from replicates) for the impurity test."),
    expected_intercept: Optional[str] = typer.Option(None, "--expected-intercept", help="Expected 1/DPn0 [-] and optionally its standard error: VALUE[,SE]."),
    C_M: Optional[float] = typer.Option(None, "--C-M", help="Known transfer-to-monomer constant [-] for the intercept check."),
    kinetic_term: Optional[float] = typer.Option(None, "--kinetic-term", help="Known kinetic part of 1/DPn0 [-] for the intercept check."),
    cld_window: Optional[str] = typer.Option(None, "--cld-window", help="CLD window for every run: M_LOW,M_HIGH [g/mol] (default: automatic near the peak)."),
    cld_fraction: float = typer.Option(0.7, "--cld-fraction", min=0.05, max=0.95, help="Automatic CLD window: dw/dlogM above this fraction of its maximum."),
    confidence: float = typer.Option(0.95, "--confidence", min=0.5, max=0.999999, help="Level of the constants' confidence intervals."),
    sheet_name: Optional[str] = typer.Option(None, "--sheet", help="Workbook sheet of the run-series sheet."),
    no_plots: bool = typer.Option(False, "--no-plots", help="Do not draw the PNG plots."),
    delta: Optional[float] = typer.Option(None, "--delta", help="Share of termination by disproportionation, delta = k_td/k_t [-] (default: sheet column 'delta [-]', else the monomer's bundled value, else 1)."),
    kinetic: str = typer.Option("auto", "--kinetic", help="Kinetic term when [M], [I] or R_p vary: auto (a regressor when it spans about 2-fold), regressor, reference (computed from bundled k_p, k_t, f k_d), none."),
    target_Mn: Optional[float] = typer.Option(None, "--target-Mn", help="Dosing: target Mn [g/mol] of the polymer collected up to --conversion."),
    target_Mw: Optional[float] = typer.Option(None, "--target-Mw", help="Dosing: target Mw [g/mol] (instead of --target-Mn)."),
    conversion: Optional[float] = typer.Option(None, "--conversion", help="Dosing: final monomer conversion [-] (0 < x < 1)."),
    monomer_conc: Optional[float] = typer.Option(None, "--monomer-conc", help="Dosing: [M]0 of the recipe [mol/L] (default: the series' mean)."),
) -> None:
    """Chain-transfer constants from a run series (Mayo, Mw/2, CLD; drift; impurity flags; ln C vs 1/T; dosing)."""
    from . import formatting as F
    from .report import write_transfer
    from .transfer import TransferOptions, analyse_series

    _check_out(out)
    drift_choices: dict[str, str | bool] = {"auto": "auto", "yes": True, "no": False}
    drift_opt = drift_choices.get(drift.strip().lower())
    if drift_opt is None:
        from .errors import DataError

        raise DataError(f"{drift!r}: use auto, yes or no", key="--drift")
    window = _numbers(cld_window, (2,), "--cld-window")
    expected = _numbers(expected_intercept, (1, 2), "--expected-intercept")
    from .errors import DataError

    if window is not None and not 0 < window[0] < window[1]:
        raise DataError(f"{cld_window!r}: give M_LOW,M_HIGH in g/mol with 0 < M_LOW < M_HIGH", key="--cld-window")
    for name, val in (("--expected-intercept", expected), ("--C-M", C_M), ("--kinetic-term", kinetic_term),
                      ("--impurity-C", impurity_C), ("--rel-error", rel_error)):
        vals = val if isinstance(val, tuple) else (val,)
        if any(v is not None and not (v >= 0 and v != float("inf")) for v in vals):
            raise DataError(f"{', '.join(map(str, vals))} must be finite and not negative [-]", key=name)
    options = TransferOptions(
        terms=tuple(t.strip() for t in terms.split(",") if t.strip()) if terms else None,
        estimators=tuple(e.strip() for e in estimators.split(",") if e.strip()),
        drift=drift_opt, cld_window=(window[0], window[1]) if window else None,
        cld_fraction=cld_fraction, confidence=confidence,
        impurity_confidence=impurity_confidence, impurity_adjust="run" if per_run else "series",
        impurity_C=impurity_C, rel_error=rel_error,
        expected_intercept=(expected if expected is None or len(expected) == 2 else expected[0]),
        C_M=C_M, kinetic_term=kinetic_term, delta=delta, kinetic=kinetic.strip().lower(),
    )
    dosing_targets = _dosing_targets(target_Mn, target_Mw, conversion)
    with _stage("run series: chromatograms and fits"):
        result = analyse_series(sheet, method, options, sheet=sheet_name)
    dosing = _dosing(result, dosing_targets, monomer_conc, confidence)
    with _stage("writing tables" + ("" if no_plots else " and plots")):
        paths = write_transfer(result, out, plots=not no_plots, dosing=dosing)
    _print_table(result.constants_table().to_dict("records"), TRANSFER_COLUMNS)
    for g in result.groups:
        _echo_group(g)
    for d in dosing:
        c, w = d.concentration, d.per_100g
        typer.echo(f"{d.group}: for {d.target} = {d.target_value:g} g/mol at conversion {d.conversion:g}: "
                   f"[A]0/[M]0 = {d.ratio.value:.4g} ({d.ratio.ci_low:.4g} to {d.ratio.ci_high:.4g}), "
                   f"[A]0 = {c.value:.4g} mol/L ({c.ci_low:.4g} to {c.ci_high:.4g}), "
                   f"{w.value:.4g} mol per 100 g monomer ({100 * d.ratio.confidence:g} % interval; {d.model})")
    for lbl, fit in result.arrhenius:
        typer.echo(f"{lbl['agent']} {lbl['term']} ({lbl['estimator']}, {lbl['model']}): "
                   f"E_tr - E_p = {F.significant(fit.delta_E.value, 3)} kJ/mol ("
                   f"{F.interval(fit.delta_E.ci_low, fit.delta_E.ci_high, unit='kJ/mol', level=fit.delta_E.confidence)}), "
                   f"A_tr/A_p = {fit.A_ratio.value:.3g}")
    listed = ", ".join(sorted(p for p in paths if "/" not in p))
    typer.echo(f"wrote {out}/ ({listed}{', plots/' if any('/' in p for p in paths) else ''})")
    typer.echo(f"safety: {result.summary()['safety']}")
    if result.failed:
        _err(f"{result.failed} run(s) could not be processed (see runs.csv)")
        raise typer.Exit(EXIT_FAILED_ROWS)


@app.command("diagnose")
@_guard
def diagnose_cmd(
    recipe: Path = typer.Argument(..., help="Recipe: TOML or a recipe sheet (CSV/XLSX); start from `gpctools template recipe.toml` (or recipe.csv)."),
    out: Path = typer.Option(Path("gpctools-diagnosis"), "--out", "-o", help="Output folder."),
    measured: Optional[Path] = typer.Option(None, "--measured", help="Batch results table (results.csv/.xlsx) with this batch's Mn and Mw; its distributions/ folder gives the whole distribution."),
    sample: Optional[str] = typer.Option(None, "--sample", help="sample_id to take from --measured (needed when it holds several samples)."),
    xlsx: bool = typer.Option(True, "--xlsx/--no-xlsx", help="Also write diagnosis.xlsx."),
) -> None:
    """Why is the molar mass low? Predict the recipe, compare with the measurements, rank the causes."""
    from .kinetics import diagnose_recipe
    from .report import write_diagnosis
    from .report.diagnosis import distribution_tables

    _check_out(out)
    if sample is not None and measured is None:
        from .errors import InputFormatError

        raise InputFormatError("--sample needs --measured RESULTS.csv to take the sample from", key="--sample")
    dists: list[Path] = []
    if measured is not None:
        from .kinetics.inputs import results_sample

        dists = distribution_tables(measured, results_sample(measured, sample))
    with _stage("diagnosis: prediction, checks, ranked causes"):
        d = diagnose_recipe(recipe, measured_path=measured, sample_id=sample, distribution_paths=dists)
        paths = write_diagnosis(d, out, xlsx=xlsx)
    _echo_diagnosis(d)
    typer.echo(f"\nwrote {out}/: " + ", ".join(p.name for p in paths.values()))


def _echo_diagnosis(d: Any) -> None:
    """Print the verdict, findings, leading causes, impurity amount and flagged checks."""
    typer.echo(f"{d.label}: verdict {d.verdict}")
    for f in d.findings:
        typer.echo(f"instrument finding ({f.check}): {f.text}")
        typer.echo(f"   fix: {f.action}")
    for i, c in enumerate(d.causes[:3], start=1):
        typer.echo(f"{i}. {c.title}: {c.share:.3g} % likelihood share"
                   + ("" if c.key == "none" else f" ({c.plausibility})"))
        typer.echo(f"   {c.text}")
        typer.echo(f"   next: {c.next_step}")
    if d.excess is not None:
        ex = d.excess
        typer.echo(f"excess 1/DPn {ex.value:.4g} (95 % interval {ex.low:.3g} to {ex.high:.3g}); "
                   f"{ex.relation.split(':')[0]}")
        for i in d.impurities[:3]:
            typer.echo(f"   {i.name} (C = {i.C:.3g}): {i.ppm_mol:.3g} ppm (mol) relative to monomer "
                       f"(95 %: {i.ppm_mol_low:.3g} to {i.ppm_mol_high:.3g})")
    for c in d.checks:
        if c.status == "flag":
            typer.echo(f"check {c.check}: {c.text}")
    for w in d.warnings:
        _err(f"warning: {w}")
    typer.echo("")
    for line in d.safety[:2]:
        typer.echo(line)


@app.command("demo")
@_guard
def demo_cmd(
    out: Path = typer.Option(Path("gpctools-demo"), "--out", "-o", help="Output folder."),
    samples: Optional[Path] = typer.Option(
        None, "--samples",
        help="Folder with your own sample runs (batch.csv, method.toml; optional truth.csv, spec_limits.csv, "
             "transfer_series/, troubleshooting/). Default: the invented scenario, written into OUT/sample_runs."),
) -> None:
    """Run the whole job (batch, QC, transfer, diagnosis) on invented sample runs and compare with the truth."""
    from .demo import run_demo

    _check_out(out)
    report = run_demo(samples, out, echo=_say, stage=_stage)
    if report["failed"]:
        raise typer.Exit(EXIT_FAILED_ROWS)


@app.command("template")
@_guard
def template_cmd(
    names: Optional[list[str]] = typer.Argument(
        None, metavar="NAME",
        help="Template file name (method.toml) or name without extension (batch: every format of it)."),
    out: Path = typer.Option(Path("."), "--out", "-o", help="Folder to write into (created when missing)."),
    force: bool = typer.Option(False, "--force", help="Overwrite files that exist."),
    list_: bool = typer.Option(False, "--list", "-l", help="List the templates with a one-line description."),
    all_: bool = typer.Option(False, "--all", help="Write every template."),
) -> None:
    """Write starter files (method, batch sheet, standards, spec limits, run series, recipe) to edit."""
    from .errors import InputFormatError
    from .report.files import write_bytes
    from .templates import available, find

    every = available()
    if list_ or not (names or all_):
        width = max(len(t.name) for t in every)
        for t in every:
            typer.echo(f"{t.name:<{width}}  {t.description}")
        if not (list_ or names or all_):
            typer.echo("\nwrite one into this folder: gpctools template NAME (--out DIR, --force, --all)")
        return
    chosen = every if all_ else find(names or [])
    _check_out(out)
    existing = [t.name for t in chosen if (out / t.name).exists()]
    if existing and not force:
        where = "the current folder" if out == Path(".") else str(out)
        verb = "exists" if len(existing) == 1 else "exist"
        raise InputFormatError(f"{', '.join(existing)} already {verb} in {where}; pass --force to overwrite, "
                               "or --out DIR to write elsewhere")
    for t in chosen:
        write_bytes(out / t.name, t.read_bytes())
        typer.echo(f"wrote {out / t.name}")
    written = {t.name for t in chosen}
    for t in chosen:
        for c in t.companions:
            if c not in written and not (out / c).exists():
                typer.echo(f"{t.name} reads {c}: write it too with gpctools template {c}")


def main() -> None:
    """Console-script entry point: run the CLI, turning a closed output pipe into exit 141."""
    if os.environ.get("GPCTOOLS_DEBUG"):
        _STATE["debug"] = True
    try:
        app(prog_name="gpctools")
    except BrokenPipeError:  # a closed pipe outside a command (help text, version)
        _silence_stdout()
        sys.exit(EXIT_CLOSED_PIPE)


if __name__ == "__main__":  # pragma: no cover
    main()
