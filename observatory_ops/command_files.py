"""What the management commands say about a file they are given and cannot reach."""
from __future__ import annotations

import getpass

from django.core.management.base import CommandError


def unreachable(file: str, to: str = "read") -> CommandError:
    """A file behind a folder the user running the command may not enter (a root shell's file given to
    ``runuser -u obsops``): said in a line, where ``Path.exists()`` raised a traceback (an operator review). ``to``:
    what the command does with it ("read", or "write" for a backup's file)."""
    return CommandError(f"{file}: permission denied: the user running this command ({getpass.getuser()}) cannot reach "
                        f"it; put it where that user can {to} it")
