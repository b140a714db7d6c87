"""Helpers for the line overview's tests (``tests/test_line_*.py``). Not part of the program.

- :func:`chromium`: Debian's Chromium at ``/usr/bin/chromium`` driven by Playwright, headless,
  with a fresh profile (never a browser downloaded by Playwright). A test that needs it is
  skipped when it cannot start, and fails instead when the environment has ``CI=true``.
- :func:`line_view`: an ``acquire line-view`` process on a free port, and its page's address.
- :func:`station_process`: an ``acquire station`` process reading serials from a pipe.
- :func:`acquire_json`: an ``acquire ... --json`` command's output.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pytest

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = "/usr/bin/chromium"
#: How the browser is started: headless, nothing fetched or synchronised behind the test's back.
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def _env() -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1")


@contextmanager
def chromium(profile: Path) -> Iterator[Any]:
    """A Playwright browser context of Debian's Chromium with the fresh profile ``profile``."""
    from playwright.sync_api import Error, sync_playwright

    with sync_playwright() as driver:
        try:
            context = driver.chromium.launch_persistent_context(
                str(profile),
                executable_path=CHROMIUM,
                headless=True,
                args=CHROMIUM_ARGS,
                viewport={"width": 1600, "height": 1000},
            )
        except Error as exc:
            reason = f"Chromium at {CHROMIUM} cannot start ({str(exc).splitlines()[0]})"
            if os.environ.get("CI") == "true":
                pytest.fail(f"{reason}; CI=true requires the browser tests to run")
            pytest.skip(f"{reason}; install Debian's chromium package to run this test")
        try:
            yield context
        finally:
            context.close()


@contextmanager
def line_view(store_url: str, *extra: str) -> Iterator[str]:
    """``acquire line-view --store store_url --port 0``: yields the page's address."""
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "line-view", "--store", store_url, "--port", "0", *extra],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=_env(),
    )
    try:
        line = proc.stdout.readline() if proc.stdout else ""
        if " at http://" not in line:
            proc.kill()
            raise AssertionError(f"line-view did not start: {line!r} {proc.communicate()[1]}")
        yield line.split(" at ", 1)[1].split()[0]
    finally:
        proc.terminate()
        proc.communicate(timeout=20)


def station_process(
    resource: str, store_url: str, lot: str, operator: str, station: str, folder: Path, *extra: str
):
    """An ``acquire station`` of the example plan (options ``extra`` added) whose serials the
    caller writes to stdin."""
    from acquire.production.plan_file import example_plan_path

    outbox = folder / f"outbox-{os.urandom(4).hex()}.db"
    return subprocess.Popen(
        [sys.executable, "-m", "acquire", "station", "--resource", resource, "--store", store_url,
         "--plan", str(example_plan_path()), "--lot", lot, "--operator", operator,
         "--station", station, "--no-bell", "--outbox", str(outbox), *extra],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env=_env(), cwd=folder,
    )  # fmt: skip


def acquire_json(*args: str) -> dict[str, Any]:
    """The JSON that ``acquire ARGS --json`` prints."""
    proc = subprocess.run(
        [sys.executable, "-m", "acquire", *args, "--json"],
        capture_output=True, text=True, timeout=60, env=_env(),
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)
