"""The one exception type every layer raises for a user's mistake (bad port, bad file, bad value).

It lives in `protocol/` because that is the one package every other layer may import. The message
must be a single line that says what is wrong and what to do; the command line prints it and exits 2.
"""

from __future__ import annotations


class UserError(Exception):
    """A mistake in the command line, a port or an input file; `str(exc)` is shown as it is."""
