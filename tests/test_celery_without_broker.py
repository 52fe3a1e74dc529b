"""A worker or beat started without CELERY_BROKER_URL refuses to start, naming the variable (observatory_ops.celery
.NO_BROKER). An IT review started them with the environment file not loaded: Celery went looking for its own default
broker, amqp://localhost, and retried for ever without saying what was missing."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from observatory_ops.celery import NO_BROKER

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("command", [["worker", "--pool=solo"], ["beat", "--schedule=/dev/null"]])
def test_a_worker_or_beat_without_a_broker_refuses_to_start_and_says_why(command, tmp_path):
    env = {k: v for k, v in os.environ.items() if k != "CELERY_BROKER_URL"}
    env["OBSOPS_DATA_DIR"] = str(tmp_path)
    if command[0] == "beat":
        command = ["beat", f"--schedule={tmp_path / 'beat-schedule'}"]
    done = subprocess.run([sys.executable, "-m", "celery", "-A", "observatory_ops", *command], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode != 0
    assert NO_BROKER in done.stdout + done.stderr
