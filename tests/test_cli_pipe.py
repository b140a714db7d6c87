"""The command line when the reader of its output goes away (``acquire predict | head -1``).

A closed pipe is the reader's choice, not an error of ours: the command stops quietly instead of
printing "error: [Errno 32] Broken pipe" (the Python documentation's note on SIGPIPE, in the
``signal`` module, describes the same handling).
"""

from __future__ import annotations

import os
import subprocess
import sys


def test_a_closed_pipe_ends_the_command_without_an_error_line():
    read, write = os.pipe()
    os.close(read)  # the reader is gone before anything is written
    args = ["predict", "--turns", "150", "--diameter", "30mm", "--length", "45mm", "--awg", "30"]
    args.append("--json")  # plain print(), which meets the closed pipe itself
    try:
        done = subprocess.run(
            [sys.executable, "-m", "acquire", *args],
            stdout=write,
            stderr=subprocess.PIPE,
            text=True,
            timeout=60,
            env={**os.environ, "COLUMNS": "100"},
        )
    finally:
        os.close(write)
    assert "Broken pipe" not in done.stderr
    assert "Traceback" not in done.stderr
    assert done.returncode in (0, 1)
