"""Typed exceptions of radialpn. The library raises these; only ``cli`` turns them into
exit codes."""


class RadialpnError(Exception):
    """Base class of every error radialpn raises on purpose."""


class DesignError(RadialpnError, ValueError):
    """A design field is missing, malformed or outside its allowed range.

    The message is one line naming the field, the allowed range and the value given.
    """

    def __init__(self, field: str, message: str, value: object = None):
        if isinstance(value, str):
            value = str(value)  # numpy string scalars print as np.str_(...) otherwise
        self.field = field
        self.value = value
        super().__init__(f"{field}: {message}" + ("" if value is None else f" (got {value!r})"))


class SettingError(RadialpnError, ValueError):
    """A setting (a keyword argument or environment variable that is not a design field)
    outside its allowed range; the message names it, the range and the value given."""


class MaterialError(RadialpnError, KeyError):
    """Unknown material, or a malformed material file."""

    def __str__(self) -> str:  # KeyError quotes its message; we want it plain
        return str(self.args[0]) if self.args else ""
