"""``simkit watch``: the server's guards (without a browser), then the page in a real headless Chromium
while the design file is edited, broken and mended.

The browser part reads what a person would see: the figure in the page's table, the error box,
the stage and the elapsed time of a run.  Figures on the page are compared with ``simkit run
--json`` of the same design, exactly.
"""

from __future__ import annotations

import http.client
import json
import os
import re
import shutil
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest

from simkit.errors import UsageError
from simkit.watch import Runner, Watched, check_out_dir, default_out_dir
from simkit.watch.server import FILE_POLICY, HOST, WatchServer
from simkit.watch.state import LiveState, Served
from tests.cdp import Browser

EXAMPLE = Path(__file__).resolve().parent.parent / "simkit" / "examples" / "bench_amp_bridge_clc.toml"


# -- the server, with a state filled in by hand ------------------------------------------------------


@pytest.fixture
def served() -> Iterator[WatchServer]:
    state = LiveState(design_file="amp.toml")
    state.publish_report(1, {"report.html": Served(b"<html><body>report</body></html>", "text/html; charset=utf-8")})
    server = WatchServer(state, 0)
    server.serve_in_background()
    try:
        yield server
    finally:
        server.shutdown()
        server.server_close()


def get(server: WatchServer, path: str, host: str | None = None, method: str = "GET") -> tuple[int, dict[str, str],
                                                                                                 bytes]:
    conn = http.client.HTTPConnection(HOST, server.port, timeout=10)
    try:
        conn.putrequest(method, path, skip_host=True, skip_accept_encoding=True)
        conn.putheader("Host", host if host is not None else f"127.0.0.1:{server.port}")
        conn.endheaders()
        r = conn.getresponse()
        return r.status, {k.lower(): v for k, v in r.getheaders()}, r.read()
    finally:
        conn.close()


def test_listens_on_this_computer_only(served: WatchServer) -> None:
    assert served.server_address[0] == "127.0.0.1"
    assert served.url == f"http://127.0.0.1:{served.port}/"


def test_serves_the_page_and_the_report_files_it_wrote(served: WatchServer) -> None:
    status, headers, body = get(served, "/")
    assert status == 200 and b'<script src="page.js"' in body and b"High voltage." in body
    assert "script-src 'self'" in headers["content-security-policy"]
    status, headers, body = get(served, "/files/report.html")
    assert status == 200 and body == b"<html><body>report</body></html>"
    assert headers["content-security-policy"] == FILE_POLICY and "sandbox" in FILE_POLICY  # no script runs there
    status, _, body = get(served, "/state?after=-1")
    doc = json.loads(body)
    assert status == 200 and doc["report"] == {"number": 1, "files": ["report.html"]} and doc["cautions"]


@pytest.mark.parametrize("path", ["/files/../amp.toml", "/files/%2e%2e/amp.toml", "/files/..%2famp.toml",
                                  "/files//etc/passwd", "/files/%2fetc%2fpasswd", "/files/report.html/",
                                  "/files/REPORT.HTML", "/../../etc/passwd", "/amp.toml", "/files/"])
def test_no_path_reaches_the_disk(served: WatchServer, path: str) -> None:
    status, _, body = get(served, path)
    assert status == 404, (path, body)


def test_other_hosts_and_methods_are_refused(served: WatchServer) -> None:
    assert get(served, "/", host="evil.example")[0] == 403  # a name pointed at 127.0.0.1 by someone else
    assert get(served, "/", host=f"evil.example:{served.port}")[0] == 403
    assert get(served, "/", host=f"localhost:{served.port}")[0] == 200
    for method in ("POST", "PUT", "DELETE"):
        assert get(served, "/state", method=method)[0] == 405


def test_a_busy_port_is_bad_input(served: WatchServer) -> None:
    with pytest.raises(UsageError, match=f"--port {served.port}"):
        WatchServer(LiveState(design_file="x.toml"), served.port)


def test_the_output_folder_stays_in_the_designs_folder(tmp_path: Path) -> None:
    design = tmp_path / "amp.toml"
    assert default_out_dir(design) == tmp_path / "amp-watch"
    assert check_out_dir(design, tmp_path / "sub" / "here") == tmp_path / "sub" / "here"
    with pytest.raises(UsageError, match="inside the design's folder"):
        check_out_dir(design, tmp_path.parent / "elsewhere")
    with pytest.raises(UsageError, match="inside the design's folder"):
        check_out_dir(design, tmp_path / "sub" / ".." / ".." / "elsewhere")


def test_the_state_keeps_the_last_good_figures_through_an_error() -> None:
    state = LiveState(design_file="amp.toml")
    state.start_run()
    state.figures(1, "t", {"vout_dc_v": 300.0}, [])
    state.finish(1.0)
    state.start_run()
    state.fail("amp.toml: load.r: must be above 0", "design")
    snap = state.snapshot()
    assert snap["status"] == "error" and snap["error"]["message"].endswith("must be above 0")
    assert snap["result"]["figures"][0]["value"] == 300.0
    state.start_run()
    state.figures(3, "t", {"vout_dc_v": 303.0}, [])
    snap = state.snapshot()
    assert snap["error"] is None and snap["result"]["figures"][0]["change"] == "+3 V (+1 %)"


def test_a_run_follows_changes_of_content_only(tmp_path: Path) -> None:
    design = tmp_path / "amp.toml"
    design.write_text(EXAMPLE.read_text())
    runner = Runner(str(design), (), None, LiveState(design_file="amp.toml"), lambda _text: None)
    assert runner.changed()  # the first look runs it
    assert not runner.changed()
    os.utime(design, ns=(time.time_ns() + 5_000_000_000,) * 2)  # touched, or saved unchanged
    assert not runner.changed()
    design.write_text(EXAMPLE.read_text().replace('r = "4k"', 'r = "5k"'))
    assert runner.changed()


def test_watching_reads_only_regular_design_sized_files(tmp_path: Path) -> None:
    design = tmp_path / "amp.toml"
    design.write_text('library = "/dev/zero"\n' + EXAMPLE.read_text())
    watched = Watched(design)
    assert watched.files() == [design, Path("/dev/zero")]
    assert len(watched.content()) == 64  # /dev/zero is refused by the safe reader, never read


def _fake_run(monkeypatch: pytest.MonkeyPatch, checks: Any) -> None:
    """Stand-ins for the simulation, the checks and the report, so a run needs no simulator."""
    from types import SimpleNamespace

    from simkit import checks as checking
    from simkit import pipeline, progress
    from simkit.report import design_report

    def simulate(design: Any) -> Any:
        progress.report("steady state", 0.02, None)
        return SimpleNamespace(metrics={"vout_dc_v": 300.0}, warnings=[])

    monkeypatch.setattr(pipeline, "simulate", simulate)
    monkeypatch.setattr(checking, "run_checks", checks)
    monkeypatch.setattr(design_report, "write_report", lambda *args: [])


def test_the_checks_corner_runs_show_and_a_save_during_them_starts_again(tmp_path: Path,
                                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    from simkit import progress

    design = tmp_path / "amp.toml"
    design.write_text(EXAMPLE.read_text())
    state = LiveState(design_file="amp.toml")
    said: list[str] = []
    runner = Runner(str(design), (), None, state, said.append)
    details: list[str] = []
    reached: list[str] = []

    def checks(d: Any) -> tuple[Any, str]:
        with progress.stage("corner 2 of 5: high mains, light load"):
            progress.report("switch-on", 0.5, 2.0)
            details.append(state.snapshot()["run"]["detail"])
            design.write_text(EXAMPLE.read_text().replace('r = "4k"', 'r = "50k"'))  # saved during the checks
            progress.report("switch-on", 1.0, 2.0)
            reached.append("after the save")
        return None, ""

    _fake_run(monkeypatch, checks)
    assert runner.changed()
    runner.run_once()
    assert details and "switch-on" in details[0] and "[corner 2 of 5: high mains, light load]" in details[0]
    assert not reached and "starting again" in said[-1]  # stopped at the next report, not after the checks
    assert state.snapshot()["run"] is None and state.snapshot()["result"]["verdicts"] is None
    assert runner.changed()  # the new content runs next


def test_sigterm_stops_a_run_during_the_checks(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from simkit import progress, watch

    design = tmp_path / "amp.toml"
    design.write_text(EXAMPLE.read_text())
    runner = Runner(str(design), (), None, LiveState(design_file="amp.toml"), lambda _text: None)

    def checks(d: Any) -> tuple[Any, str]:
        with progress.stage("corner 1 of 3: high mains, heavy load"):
            monkeypatch.setattr(watch._TERM, "requested", True)
            progress.report("steady state", 0.1, None)
        raise AssertionError("the checks went on after SIGTERM")

    _fake_run(monkeypatch, checks)
    assert runner.changed()
    with pytest.raises(KeyboardInterrupt):
        runner.run_once()


# -- the page in a browser, while the file changes ----------------------------------------------------


def cli_figures(design: Path, *sets: str) -> dict[str, float]:
    args = [sys.executable, "-m", "simkit.cli", "run", str(design), "--json", *[f"--set={s}" for s in sets]]
    out = subprocess.run(args, capture_output=True, text=True, check=True, timeout=300).stdout
    return json.loads(out)["metrics"]


VALUE = "(function(){var td=document.querySelector('tr[data-figure=\"vout_dc_v\"] td.value');" \
        "return td ? td.getAttribute('data-value') : null;})()"
ERROR = "(function(){var e=document.getElementById('error'); return e && !e.hidden ? " \
        "document.getElementById('error-text').textContent : null;})()"
STATUS = "(function(){return [document.getElementById('status').getAttribute('data-status'), " \
         "document.getElementById('stage').textContent, document.getElementById('elapsed').textContent];})()"


@pytest.fixture
def watched(tmp_path: Path) -> Iterator[tuple[Path, str, subprocess.Popen[str]]]:
    folder = tmp_path / "design"
    folder.mkdir()
    design = folder / "amp.toml"
    shutil.copyfile(EXAMPLE, design)
    proc = subprocess.Popen([sys.executable, "-m", "simkit.cli", "watch", str(design), "--port", "0"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=tmp_path)
    try:
        assert proc.stdout is not None
        url = proc.stdout.readline().strip()
        assert re.fullmatch(r"http://127\.0\.0\.1:\d+/", url), (url, proc.stderr.read() if proc.poll() else "")
        yield design, url, proc
    finally:
        proc.send_signal(signal.SIGTERM)
        try:
            _, err = proc.communicate(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            _, err = proc.communicate()
        print(err)


@pytest.mark.ngspice
def test_the_page_follows_edits_in_a_browser(watched: tuple[Path, str, subprocess.Popen[str]],
                                             tmp_path: Path) -> None:
    design, url, proc = watched
    with Browser(tmp_path / "profile") as browser:
        page = browser.open(url)
        first = float(page.wait_for(VALUE, timeout=120))
        # The page's figure is simkit run's figure for the same file, to the last digit.
        assert first == cli_figures(design)["vout_dc_v"]
        assert page.wait_for("document.getElementById('report').getAttribute('src')", timeout=60) \
            == "files/report.html?run=1"
        report = page.evaluate("fetch('files/report.html').then(r => r.text())", await_promise=True)
        assert "High-voltage cautions" in report and "Invented example" in report
        assert page.evaluate("fetch('files/amp.toml').then(r => r.status)", await_promise=True) == 404

        # An edit, saved in place: a lighter load.  The page shows the new figure without a reload,
        # and the run's stage and elapsed time while it runs.
        text = design.read_text()
        assert 'r = "4k"' in text
        design.write_text(text.replace('r = "4k"', 'r = "8k"'))
        seen: list[list[str]] = []
        t0 = time.monotonic()
        while True:
            seen.append(page.evaluate(STATUS))
            value = page.evaluate(VALUE)
            if value is not None and float(value) != first:
                break
            assert time.monotonic() - t0 < 120, f"the page never changed; saw {seen[-3:]}"
            time.sleep(0.05)
        print(f"edit to new figure on the page: {time.monotonic() - t0:.2f} s")
        second = float(value)
        assert second == cli_figures(design)["vout_dc_v"]
        # A lighter load on a capacitor-input supply gives a higher output (the source's and
        # rectifier's drops fall with the current; common practice).
        assert second > first
        running = [s for s in seen if s[0] == "running"]
        assert running and any(s[1] and re.fullmatch(r"elapsed \d+\.\d s", s[2]) for s in running), seen
        assert page.wait_for("document.getElementById('report').getAttribute('src') === 'files/report.html?run=2'",
                             timeout=60)
        change = page.evaluate("document.querySelector('tr[data-figure=\"vout_dc_v\"] td.change').textContent")
        assert change.startswith("+") and "%" in change

        # A broken edit, saved as editors do (a new file renamed over the old): the error shows,
        # the last good figures stay.
        broken = design.with_name("amp.toml.new")
        broken.write_text(design.read_text().replace('r = "8k"', 'r = "-8k"'))
        os.replace(broken, design)
        message = page.wait_for(ERROR, timeout=60)
        assert "amp.toml" in message and "load.r" in message
        assert float(page.evaluate(VALUE)) == second
        assert "last good result" in page.evaluate("document.getElementById('error-keep').textContent")
        assert page.evaluate("document.getElementById('status').getAttribute('data-status')") == "error"

        # Mended: the error goes, the figure is the first one again.
        design.write_text(text)
        page.wait_for(f"{VALUE} !== null && Number({VALUE}) === {first!r}", timeout=60)
        assert page.evaluate(ERROR) is None
    assert proc.poll() is None  # still watching until stopped
