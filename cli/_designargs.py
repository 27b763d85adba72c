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
