"""Design flags named after the design-table columns, shared by every design command."""

from __future__ import annotations

#: flag -> (column, help)
DESIGN_FLAGS = {
    "--material": ("material", "semiconductor, e.g. GaAs (see `radialpn materials`)"),
    "--core-type": ("core_type", "p (p-core, n-shell) or n (n-core, p-shell)"),
    "--core-radius": ("core_radius_nm", "core radius a, e.g. 60nm or 0.06um"),
    "--shell-thickness": ("shell_thickness_nm", "shell thickness R - a, e.g. 40nm"),
    "--core-doping": ("core_doping_cm3", "core net doping, cm^-3, e.g. 1e18"),
    "--shell-doping": ("shell_doping_cm3", "shell net doping, cm^-3"),
    "--dit": ("dit_cm2eV", "surface-state density D_it, cm^-2 eV^-1 (0 allowed)"),
    "--cnl": ("cnl_eV", "surface neutral level above E_v, eV (default: the material's)"),
    "--temperature": ("temperature_K", "temperature, K (default 300)"),
    "--interlayer": ("interlayer_nm", "intrinsic interlayer thickness, nm (default 0)"),
}
COLUMN_FLAG = {col: flag for flag, (col, _) in DESIGN_FLAGS.items()}


def add_design_flags(parser) -> None:
    group = parser.add_argument_group("design (names follow the design-table columns; unit suffixes accepted)")
    for flag, (col, text) in DESIGN_FLAGS.items():
        group.add_argument(flag, dest=col, metavar="VALUE", help=text)


def design_from_args(args) -> dict:
    """The design mapping given on the command line (unset flags left out)."""
    return {col: getattr(args, col) for col, _ in DESIGN_FLAGS.values() if getattr(args, col) is not None}


def flag_hint(message: str) -> str:
    """Name the command-line flag beside the column a validation message starts with."""
    field = message.split(":", 1)[0]
    flag = COLUMN_FLAG.get(field)
    return f"{flag} ({message})" if flag else message


def engine_flags(sp, engines=None, default=None, ionisation=True) -> None:
    """--engine and --statistics (and --ionisation unless ``ionisation`` is False), shared by
    every command that asks an engine."""
    import radialpn

    engines = engines or radialpn.ENGINES
    sp.add_argument("--engine", choices=engines, default=default or radialpn.DEFAULT_ENGINE, help="which engine answers")
    sp.add_argument("--statistics", choices=radialpn.STATISTICS, default="fermi-dirac",
                    help="carrier statistics for the bulk Fermi levels (default fermi-dirac)")
    if ionisation:
        ionisation_flag(sp)


def ionisation_flag(sp) -> None:
    """--ionisation, beside --statistics wherever an engine answers."""
    import radialpn

    sp.add_argument("--ionisation", choices=radialpn.IONISATION, default="auto",
                    help=f"dopant ionisation (default auto: incomplete below {radialpn.IONISATION_AUTO_BELOW_K:g} K "
                         f"or for dopants {radialpn.IONISATION_DEEP_EV:g} eV deep or deeper, else full)")


def confirm_flag(sp) -> None:
    sp.add_argument("--confirm", action="store_true",
                    help="auto engine: re-answer designs the surrogate flags as uncertain with the solver")


def target_flags(sp) -> None:
    """The V_bi target of size, search and spread."""
    sp.add_argument("--fraction", type=float, default=0.9, help="target V_bi >= FRACTION * V_bi0 (default 0.9)")
    sp.add_argument("--vbi-min", metavar="V", help="target V_bi >= V instead, e.g. 0.8V")


def target_from_args(args) -> dict:
    """The target keywords of the design API (fraction_min, vbi_min_V) from the flags."""
    import radialpn

    from . import _errors

    if args.vbi_min is None:
        return {"fraction_min": args.fraction, "vbi_min_V": None}
    text = str(args.vbi_min).strip()
    body = text[:-1] if text.lower().endswith("v") else text
    try:
        v = float(body)
    except ValueError:
        raise _errors.UsageError(f"--vbi-min: expected a voltage such as 0.8V (got {text!r})") from None
    if not 0 < v < 20:
        raise _errors.UsageError(f"--vbi-min: allowed range (0, 20) V (got {text})")
    return {"fraction_min": None, "vbi_min_V": v}


def progress_bar(console, label: str):
    """A (context manager, callback) pair: a transient rich progress bar driven by the design
    API's ``progress(done, total)`` calls. Nothing is drawn (not even a blank line) unless the
    API reports progress, which it does only on runs expected to take over a second. The bar
    redraws on each report, not from a thread of its own, so the solver may still fork its
    workers (``radialpn.training.fork_safe``)."""
    import contextlib
    import time

    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    state = {}

    def update(done, total):
        if "bar" not in state:
            state["bar"] = Progress(TextColumn("[#5b8def]{task.description}"), BarColumn(), MofNCompleteColumn(),
                                    TextColumn("{task.fields[rate]}"), TimeRemainingColumn(), console=console,
                                    transient=True, auto_refresh=False)  # no refresh thread: the solver may fork
            state["bar"].start()
            state["task"], state["t0"] = state["bar"].add_task(label, total=total, rate=""), time.perf_counter()
        rate = done / max(time.perf_counter() - state["t0"], 1e-9)
        state["bar"].update(state["task"], completed=done, total=total, rate=f"{rate:,.0f}/s", refresh=True)

    @contextlib.contextmanager
    def shown():
        try:
            yield
        finally:
            if "bar" in state:
                state["bar"].stop()

    return shown(), update
