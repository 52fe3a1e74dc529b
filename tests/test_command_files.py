"""A file the user running a command cannot reach (a root shell's file given to ``runuser -u obsops``) is said in a
line naming the file, as an unreadable file already was, not raised as a traceback (an operator review). Root
enters every folder, so the refusal is simulated as the operating system gives it (PermissionError)."""
from __future__ import annotations

from pathlib import Path

import pytest
from django.core.management import CommandError, call_command


@pytest.fixture
def unreachable_paths(monkeypatch):
    def denied(self, *args, **kwargs):
        raise PermissionError(13, "Permission denied", str(self))

    for name in ("exists", "is_file", "is_dir", "stat"):
        monkeypatch.setattr(Path, name, denied)


@pytest.mark.parametrize("command, args", [
    ("import_nights", ["--site", "vestal-ridge"]),
    ("backup", []),
    ("restore", []),
])
def test_a_file_behind_a_closed_folder_is_said_in_a_line(db, site, unreachable_paths, command, args):
    if command == "import_nights":
        args = ["--site", site.slug]
    to = "write" if command == "backup" else "read"
    with pytest.raises(CommandError, match=r"^/root/n\.csv: permission denied: the user running this command \(.+\) "
                                           rf"cannot reach it; put it where that user can {to} it$"):
        call_command(command, "/root/n.csv", *args)
