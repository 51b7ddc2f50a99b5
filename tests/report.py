"""Lines printed after the tests, past pytest's output capture (which would otherwise
hide them when everything passes): how many inputs the fuzz tests tried."""

from __future__ import annotations

from collections.abc import Iterable


def write_past_capture(config, lines: Iterable[str]) -> None:
    """Write ``lines`` to the terminal, output capture or not; nothing without one."""
    reporter = config.pluginmanager.get_plugin("terminalreporter")
    capture = config.pluginmanager.get_plugin("capturemanager")
    if reporter is None or capture is None:
        return
    with capture.global_and_fixture_disabled():
        reporter.write_line("")
        for line in lines:
            reporter.write_line(line)
