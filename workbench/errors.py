"""The one base class for user-facing errors (bad files, bad settings, bad numbers).

Every message names what is wrong, where (file, table, key) and what is expected, in one line.
The CLI prints ``error: <message>`` and exits with status 2; the GUI shows the message and keeps
its previous state. Anything else that escapes is a bug and keeps its traceback.
"""


class WorkbenchError(ValueError):
    """A user-facing error with a one-line message."""
