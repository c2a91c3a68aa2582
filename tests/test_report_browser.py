"""The report in a real browser: headless Chromium, network off, hostile answers inert.

Every network request is sent to a local proxy that records the host each
connection asks for and answers none (so the network is off). Chromium itself
calls home (time, component updates, accounts) whatever its flags, so the
page's requests are the hosts asked for beyond those a blank page makes; a
control page with one remote image proves the proxy sees a page's requests. Skipped, with the reason shown, where
Chromium is not installed (``.ci/run`` installs Debian's ``chromium`` first).
"""

from __future__ import annotations

import shutil
import socket
import subprocess
import threading
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (apt-get install chromium)")


class CountingProxy:
    """A TCP listener that records the host each connection asks for and closes it."""

    def __init__(self) -> None:
        self.server = socket.socket()
        self.server.bind(("127.0.0.1", 0))
        self.server.listen(16)
        self.server.settimeout(0.2)
        self.port = self.server.getsockname()[1]
        self.hosts: list[str] = []
        self.running = True
        self.thread = threading.Thread(target=self._serve, daemon=True)
        self.thread.start()

    def _serve(self) -> None:
        while self.running:
            try:
                connection, _ = self.server.accept()
            except OSError:
                continue
            connection.settimeout(2)
            try:
                line = connection.recv(512).split(b"\r\n")[0].decode("latin-1").split()
                target = line[1] if len(line) > 1 else "?"
            except OSError:
                target = "?"
            finally:
                connection.close()
            self.hosts.append(target.split("://")[-1].split("/")[0].split(":")[0])

    def close(self) -> None:
        self.running = False
        self.thread.join()
        self.server.close()


def _page_hosts(page: Path, profile: Path, *extra: str) -> tuple[set[str], str]:
    """Hosts ``page`` asked for beyond a blank page's, and the dumped DOM (with ``--dump-dom``)."""
    blank = profile.parent / f"{profile.name}-blank.html"
    blank.write_text("<!DOCTYPE html><title>blank</title><p>blank</p>", encoding="utf-8")
    proxy = CountingProxy()
    try:
        _chromium(blank, profile.parent / f"{profile.name}-blank", proxy, "--dump-dom")
        baseline = set(proxy.hosts)
        proxy.hosts.clear()
        output = _chromium(page, profile, proxy, *extra)
    finally:
        proxy.close()
    return set(proxy.hosts) - baseline, output


def _chromium(page: Path, profile: Path, proxy: CountingProxy, *extra: str) -> str:
    command = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
               "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={profile}",
               f"--proxy-server=http://127.0.0.1:{proxy.port}", "--proxy-bypass-list=<-loopback>",
               "--virtual-time-budget=3000", *extra, page.as_uri()]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120, check=False)
    return done.stdout


@pytest.fixture(scope="module")
def crafted_page(crafted_report):
    return crafted_report[2] / "index.html"  # the crafted survey's report (tests/conftest.py)


def test_the_proxy_sees_a_page_request(tmp_path):
    control = tmp_path / "control.html"
    control.write_text('<!DOCTYPE html><title>control</title><img src="http://example.invalid/x.png">',
                       encoding="utf-8")
    hosts, _ = _page_hosts(control, tmp_path / "profile", "--dump-dom")
    assert hosts == {"example.invalid"}


def test_report_runs_no_injected_script_and_loads_nothing(crafted_page, tmp_path):
    hosts, dom = _page_hosts(crafted_page, tmp_path / "dom", "--dump-dom")
    shot = tmp_path / "page.png"
    shot_hosts, _ = _page_hosts(crafted_page, tmp_path / "shot", f"--screenshot={shot}", "--window-size=1200,2400")
    assert "<title>Survey report: survey.yaml</title>" in dom  # an injected script would have set 'pwned'
    assert "pwned" not in dom.split("</title>")[0]
    assert 'id="injected"' not in dom and "<img id=" not in dom
    # hostile answers reached the page through the quotes, and stayed text after the scripts ran
    assert 'id="quotes-table"' in dom and "zephyrgate" in dom
    assert "&lt;script&gt;document" in dom or "&lt;img id=injected" in dom or "&lt;a href=" in dom
    # our own script did run (the Content-Security-Policy hash admits it): it shows the group filters
    assert '<label class="filter">' in dom and '<label class="filter" hidden' not in dom
    assert hosts == set() and shot_hosts == set()
    # a blank or failed render is a few kilobytes; the report's first screen is far more
    assert shot.stat().st_size > 50_000
