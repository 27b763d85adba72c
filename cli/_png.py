"""PNG output through matplotlib (the optional `plot` extra), shared by every command."""

from __future__ import annotations

from . import _errors


def pyplot():
    """matplotlib.pyplot on the non-interactive Agg backend, or a one-line error if missing."""
    try:
        import matplotlib

        matplotlib.use("Agg")
        import matplotlib.pyplot as plt
    except ImportError:
        raise _errors.UsageError("--png needs matplotlib: pip install 'radialpn[plot]'") from None
    return plt


def save(fig, path) -> None:
    """Write ``fig`` to ``path`` and close it; an unwritable path is a one-line error."""
    import matplotlib.pyplot as plt

    try:
        fig.tight_layout()
        fig.savefig(path)
    except OSError as exc:
        raise _errors.UsageError(f"--png {path}: cannot write ({exc.strerror})") from None
    finally:
        plt.close(fig)
