"""Re-exports the shared user-error type for the command line and the app."""

from __future__ import annotations

from protocol.errors import UserError

__all__ = ["UserError"]
