"""The one exception family of cosmogrow.

The command line turns any `CosmogrowError` into a single line and exit code 2.
"""


class CosmogrowError(Exception):
    """Base class of every error cosmogrow raises on purpose."""


class ConfigError(CosmogrowError):
    """A configuration (TOML file or command-line option) is invalid."""


class InputError(CosmogrowError):
    """A value in an input file is invalid.

    Parameters
    ----------
    path : str
        File the value came from.
    message : str
        What is wrong and what was expected.
    row : int, optional
        1-based data row (header rows not counted).
    column : str, optional
        Column name.
    value : object, optional
        Offending value, shown with repr().
    """

    def __init__(self, path, message, *, row=None, column=None, value=None):
        self.path = str(path)
        self.row = row
        self.column = column
        self.value = value
        where = [self.path]
        if row is not None:
            where.append(f"row {row}")
        if column is not None:
            where.append(f"column '{column}'")
        text = ", ".join(where)
        if value is not None:
            text += f", value {value!r}"
        super().__init__(f"{text}: {message}")
