"""What the ``tristock`` command's exit codes mean, and the errors that choose them."""

from __future__ import annotations

from typing import Final

#: Answers found (or the command's work done).
OK: Final = 0
#: The work failed: catalog errors, a loop that cannot oscillate, a search cut by its time
#: limit before it found anything, a write the disk refused, an internal error.
FAILED: Final = 1
#: Bad input: arguments, spec or design file; one line naming the option or field.
BAD_INPUT: Final = 2
#: No design meets the spec (the reasons are printed; ``--json`` still writes the answer).
NO_DESIGN: Final = 3
#: Interrupted (Ctrl-C): "interrupted" on stderr, nothing on stdout.
INTERRUPTED: Final = 130

#: The exit-code table of ``--help`` and the README.
EPILOG = """\
exit codes:
  0    answers found (or the command's work done)
  1    the work failed: catalog errors (file:line: column: message, all at once), a loop
       that cannot oscillate, a search cut by its time limit before it found a design, a
       write the disk refused, an internal error (one line and the path of a crash log)
  2    bad input: an argument, the spec or the design file (one line naming the field)
  3    no design meets the spec: the reasons are printed (--json: the answer is still
       written, and the reasons also go to stderr in one line)
  130  interrupted (Ctrl-C): "interrupted" on stderr and no result
"""


class UsageError(Exception):
    """Bad input from the user: one line on stderr, exit 2."""


class WorkFailed(Exception):
    """The work could not be done: one line on stderr, exit 1."""
