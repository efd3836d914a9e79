"""Exception types with one-line, user-facing messages.

Every error raised for bad user input derives from :class:`EigensweepError`; the CLI and the
workflow scripts print ``str(err)`` as a single line (no traceback unless ``--debug``).
"""


class EigensweepError(Exception):
    """Base class: the message is one line naming the key or file and what to do."""


class ConfigError(EigensweepError):
    """The sweep configuration is malformed or asks for something impossible."""


class ChemistryError(EigensweepError):
    """A molecule cannot be set up or its SCF does not converge."""


class StageFileError(EigensweepError):
    """A stage file is missing, damaged, or does not match its expected key/format."""


class ResultsFileError(EigensweepError):
    """A returned-counts file does not belong to the exported device jobs."""
