"""The design report (damper/output/report/): contents, escaping, self-containment, browser.

The browser test drives headless Chromium through its DevTools protocol with a small
websocket client written here (standard library only). The page is opened in its own
browser context whose proxy is a plain socket server of this test, and host-name
resolution is switched off, so any network request the page makes reaches that server
and is recorded; the browser's own background services use a second, ignored proxy.
A control page (an image from an outside address and a console error) proves that
both the request trap and the console capture work. Skips only when no Chromium
binary is found.
"""

import base64
import json
import os
import re
import shutil
import socket
import struct
import subprocess
import threading
import time

import pytest

from damper.cli import main
from damper.errors import DamperError
from damper.output.report.build import build_report, write_report

from .conftest import ROOT
from .shared_runs import REPORT_OPTIONS

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
DEMO_CONDITIONS = (
    "SL-climb-fwd",
    "SL-climb-aft",
    "10kft-cruise-fwd",
    "10kft-cruise-aft",
    "25kft-cruise-aft",
    "25kft-cruise-fwd",
    "approach-aft",
)
SECTIONS = (
    "Read this first",
    "Outcome at a glance",
    "The task and the case",
    "Results by condition",
    "Gain schedule",
    "Robustness to uncertainty",
    "Time responses",
    "Traceability",
)


@pytest.fixture(scope="module")
def demo_run(shared_run):
    """One design run of the demo case with plots and the report (about 15 s), shared with
    test_figure_formats (tests/shared_runs.py: REPORT_OPTIONS); read only."""
    # damping_target policy: the default (balanced) currently picks K = 0 at one
    # condition, where the loop-response plot cannot be drawn (reported separately).
    run = shared_run("utility_single_aft_cg", REPORT_OPTIONS)
    assert run.code == 0, run.stderr
    return run.path


def _text(html):
    """The visible text of the HTML, roughly (tags removed, entities of interest decoded)."""
    t = re.sub(r"<style.*?</style>", " ", html, flags=re.S)
    t = re.sub(r"<[^>]+>", " ", t)
    return re.sub(r"\s+", " ", t.replace("&amp;", "&").replace("&#39;", "'").replace("&#34;", '"'))


# ---------------------------------------------------------------------------------
# contents
# ---------------------------------------------------------------------------------
def test_design_writes_a_report_with_every_section_and_condition(demo_run, capsys):
    html = (demo_run / "report.html").read_text(encoding="utf-8")
    text = _text(html)
    for name in SECTIONS:
        assert name in text, name
    for name in DEMO_CONDITIONS:
        assert html.count(f">{name}<") >= 3, name  # summary, conditions table, its own section
    # the cautions come first
    assert text.index("preliminary engineering analysis") < text.index("Outcome at a glance")
    assert "simulation, ground test and flight test" in text and "airworthiness rules" in text
    # sections not run for this case (schedule, robustness, failures) say so plainly; the
    # design also simulates the default doublet, so the time responses are there
    assert text.count("not run for this case") == 3
    # case summary: aircraft, conditions with units, loop hardware, requirements with sources
    for s in ("Invented six-seat utility turboprop", "true airspeed (kt)", "dynamic pressure (Pa)", "Mach",
              "mass (kg)", "washout, time constant 1.5 s", "Pad\u00e9 order 3", "MIL-F-9490D", "case file"):
        assert s in text, s
    # per-condition results: chosen gain, feasible interval with binding requirements, criteria with slack
    doc = json.loads((demo_run / "design.json").read_text())
    for c in doc["conditions"]:
        assert f"K = {c['chosen_gain_s']:.4g} s" in text
    assert "limited above by" in text and "short-period damping ratio" in text
    # the equivalent system's gain K is shown with the value and unit its JSON key carries:
    # q (rad/s) per rad over (s + 1/T_theta2) / (s^2 + ...) makes K 1/s^2 ([derived])
    eq = doc["conditions"][0]["measures"]["closed_loop"]["equivalent"]
    assert f"gain Kq (1/s\u00b2) {eq['gain_1_s2']:.4g}" in text
    assert text.count("slack") >= 7 and "\u2714 met" in text
    # every plot inlined
    assert html.count('src="data:image/') == 4 * len(DEMO_CONDITIONS)  # 3 design plots + 1 response
    # provenance
    assert doc["provenance"]["input_sha256"] in text and "damper design" in text and "numpy" in text


def test_report_is_self_contained_and_has_no_script(demo_run):
    html = (demo_run / "report.html").read_text(encoding="utf-8")
    low = html.lower()
    assert "<script" not in low and "javascript:" not in low
    assert "http://" not in low and "https://" not in low
    assert "<link" not in low and "@import" not in low and "<iframe" not in low and "<object" not in low
    for attr in re.findall(r"\b(?:src|href|srcset|poster|action)\s*=\s*\"([^\"]*)\"", html):
        assert attr.startswith(("data:image/", "#")), attr[:80]
    for url in re.findall(r"url\(([^)]*)\)", re.sub(r'src="data:[^"]*"', "", html)):
        assert url.strip("'\"").startswith(("data:", "#")), url


def test_report_is_rebuilt_identically(demo_run, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    a = build_report(demo_run)
    b = build_report(demo_run)
    assert a == b and "2026-01-01 00:00 UTC" in a


# ---------------------------------------------------------------------------------
# user text is escaped; failing conditions first; the report command
# ---------------------------------------------------------------------------------
def test_user_text_is_escaped_and_failing_conditions_come_first(tmp_path, capsys):
    text = open(DEMO, encoding="utf-8").read()
    title = '<script>alert(1)</script> & "quoted" <b>bold</b>'
    text = re.sub(r"^title: .*$", "title: " + json.dumps(title), text, count=1, flags=re.M)
    text = text.replace("note: \"forward CG, 20 % MAC\"", "note: \"<img src=x onerror=alert(2)>\"")
    # a programme gain-margin requirement the forward-CG conditions cannot meet
    text = text.replace("other_mode_damping: {min: 0.30}", "other_mode_damping: {min: 0.30}\n  gain_margin: {min: 38}")
    case = tmp_path / "escape.yaml"
    case.write_text(text, encoding="utf-8")
    out = tmp_path / "run"
    argv = ["design", str(case), "--out", str(out), "--no-plots", "--no-report", "--points", "40",
            "--policy", "damping_target", "--target-damping", "0.7"]
    assert main(argv) == 3  # some condition has no feasible gain: the verdict is "not met" (docs/verdict.md)
    assert not (out / "report.html").exists()  # --no-report
    capsys.readouterr()
    assert main(["report", str(out)]) == 0
    assert "report.html" in capsys.readouterr().out
    html = (out / "report.html").read_text(encoding="utf-8")
    low = html.lower()
    assert "<script" not in low and "<img" not in low and "<b>bold" not in low
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &#34;quoted&#34; &lt;b&gt;bold&lt;/b&gt;" in html
    assert "&lt;img src=x onerror=alert(2)&gt;" in html
    # failing conditions first in the summary table, marked by word and symbol (not colour only)
    doc = json.loads((out / "design.json").read_text())
    bad = [c["name"] for c in doc["conditions"] if not c["feasible"]]
    good = [c["name"] for c in doc["conditions"] if c["feasible"]]
    assert bad and good  # Source: [derived] GM at the fwd-CG damping edge is below 38 dB, aft-CG above
    summary = html[html.index('class="grid summary"'):]
    summary = summary[: summary.index("</table>")]
    rows = re.findall(r'href="#condition-\d+">([^<]+)<', summary)
    assert rows[: len(bad)] == bad and sorted(rows[len(bad):]) == sorted(good)
    assert _text(summary).count("\u2718 infeasible") == len(bad) and summary.count('class="row-fail"') == len(bad)
    assert "\u2718 MISSED" in _text(html)
    assert "plot not in this run directory" in html  # --no-plots says so instead of a broken image


def test_report_command_refuses_a_directory_without_design(tmp_path, capsys):
    assert main(["report", str(tmp_path)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "no design.json" in err and str(tmp_path) in err
    with pytest.raises(DamperError):
        write_report(tmp_path / "missing")


# ---------------------------------------------------------------------------------
# optional sections: included when their JSON is in the run directory
# ---------------------------------------------------------------------------------
def _schedule_doc(sha):
    return {
        "title": "t",
        "passed": False,
        "message": "2 of 3 verification points fail",
        "source": "conditions",
        "rounds": 1,
        "history": [{"breakpoints": 2, "failing_points": 2}],
        "table": {
            "form": "table",
            "variables": [{"name": "dynamic_pressure", "unit": "Pa", "breakpoints": [1000.0, 3000.0]}],
            "gain_unit": "s (rad of surface per rad/s of pitch rate)",
            "interpolation": "linear, clamped at the ends",
            "gains_s": [0.2, 0.1],
        },
        "breakpoint_design": {"shape": [2], "gain_s": [0.2, 0.1], "feasible": [True, True],
                              "worst_slack": [0.1, 0.05], "binding": ["cap", "damping_ratio"], "design_points": [3, 4]},
        "configurations": ["nominal"],
        "verification": {
            "points": 3, "failing": 2, "criteria": ["damping_ratio"],
            "rows": [
                {"label": "point-ok", "kind": "between", "configuration": 0, "altitude_m": 0.0, "airspeed_m_s": 50.0,
                 "variables": [1500.0], "gain_s": 0.17, "passed": True, "worst_slack": 0.1, "binding": "cap",
                 "damping_ratio": 0.7, "smallest_gain_margin_db": 20.0},
                {"label": "point-bad-1", "kind": "between", "configuration": 0, "altitude_m": 0.0, "airspeed_m_s": 60.0,
                 "variables": [2000.0], "gain_s": 0.15, "passed": False, "worst_slack": -0.02,
                 "binding": "damping_ratio", "damping_ratio": 0.49, "smallest_gain_margin_db": 19.0},
                {"label": "point-bad-2", "kind": "beyond", "configuration": 0, "altitude_m": 0.0, "airspeed_m_s": 70.0,
                 "variables": [2500.0], "gain_s": 0.12, "passed": False, "worst_slack": -0.01,
                 "binding": "damping_ratio", "damping_ratio": 0.495, "smallest_gain_margin_db": 18.0},
            ],
        },
        "provenance": {"input_sha256": sha, "seed": None, "command": "damper design x"},
    }


def _robustness_doc(sha):
    cond = {
        "name": "SL-climb-fwd", "gain_s": 0.18, "samples": 100,
        "nominal": {"all_met": True, "criteria": []},
        "pass": {"all": {"passed": 97, "fraction": 0.97, "interval": [0.91, 0.99]}, "criteria": []},
        "worst": [{"criterion": "damping_ratio", "unit": "-", "value": 0.47, "slack": -0.06, "met": False,
                   "parameters": {"M_alpha": -7.1, "M_q": -0.7}}],
        "sensitivity": {"top_driver": "M_q", "ranking": []},
        "corners": {"evaluated": 4, "passed_all": 3},
    }
    return {
        "title": "t",
        "method": {"samples": 100, "seed": 7, "confidence": 0.95, "sampling": "seeded Monte Carlo"},
        "parameters": [{"name": "M_q", "unit": "1/s", "distribution": "uniform", "relative": 0.25,
                        "conditions": [{"name": "SL-climb-fwd", "nominal": -0.9}]}],
        "joint": {"passed": 97, "fraction": 0.97, "interval": [0.91, 0.99]},
        "verdict": {"met": False, "parts": ["robustness"], "items": [
            {"part": "robustness", "condition": None, "requirement": "all", "met": False,
             "detail": {"value": 0.97, "lower": 1.0, "upper": None, "slack": -0.03, "unit": "fraction of samples"},
             "text": "97 of 100 samples (97.0 %) meet every requirement at every condition"}]},
        "conditions": [cond],
        "files": [],
        "provenance": {"input_sha256": "0" * 64, "seed": 7, "command": "damper robust x"},
    }


def _every_file(run):
    """Every file under `run` as if a run had listed it (to render hand-written documents)."""
    import hashlib

    from damper.output.runfiles import RunFiles

    listed = {}
    for base, _, names in os.walk(run):
        for name in names:
            rel = os.path.relpath(os.path.join(base, name), run).replace(os.sep, "/")
            with open(os.path.join(base, name), "rb") as fh:
                listed[rel] = {"sha256": hashlib.sha256(fh.read()).hexdigest()}
    return RunFiles.verified(str(run), listed)


def test_optional_sections_appear_when_their_json_exists(demo_run, tmp_path, capsys):
    run = tmp_path / "run"
    assert main(["respond", DEMO, "--gain", "0.1", "--out", str(run), "--no-plots"]) == 0
    shutil.copy(demo_run / "design.json", run / "design.json")
    sha = json.loads((run / "design.json").read_text())["provenance"]["input_sha256"]
    (run / "schedule.json").write_text(json.dumps(_schedule_doc(sha)), encoding="utf-8")
    (run / "robustness.json").write_text(json.dumps(_robustness_doc(sha)), encoding="utf-8")
    html = build_report(run, _every_file(run))
    text = _text(html)
    assert text.count("not run for this case") == 1 and "Failure study not run" in text  # no failures.json here
    # schedule: verdict, gain table with units, failing verification points first
    assert "\u2718 FAILED 2 of 3 verification points fail" in text
    assert "dynamic pressure (Pa)" in text and "gain K (s)" in text
    assert text.index("point-bad-1") < text.index("point-bad-2") < text.index("point-ok")
    # robustness: pass fraction, interval, worst case, and the different input flagged in traceability
    assert "\u2718 FAILED 97 of 100 samples (97.0 %) meet every requirement" in text  # the document's verdict
    assert "91.0 to 99.0 %" in text and "M_q" in text
    assert "different input" in text and "\u2714 same" in text
    # responses: every condition, bare and with the damper, degrees for angles
    for name in DEMO_CONDITIONS:
        assert f">{name}</th>" in html, name
    assert "peak pitch rate (deg/s)" in text and "with damper" in text and "design:" in text


def test_unreadable_optional_json_is_reported_not_fatal(demo_run, tmp_path):
    run = tmp_path / "run"
    run.mkdir()
    shutil.copy(demo_run / "design.json", run / "design.json")
    (run / "robustness.json").write_text("{not json", encoding="utf-8")
    text = _text(build_report(run, _every_file(run)))
    assert "robustness file could not be read" in text and text.count("not run for this case") == 3


# ---------------------------------------------------------------------------------
# the browser
# ---------------------------------------------------------------------------------
def _non_blank(png_path):
    from PIL import Image  # Pillow comes with matplotlib

    import numpy as np

    im = Image.open(png_path).convert("RGB")
    px = np.asarray(im.resize((160, 112))).reshape(-1, 3).astype(int)
    colours = len({tuple(p) for p in px})
    dark = float(np.mean(px.sum(axis=1) < 600))
    return im.size, colours, dark


def test_report_renders_in_headless_chromium_without_errors_or_requests(demo_run, tmp_path):
    chromium = require_chromium()
    page = Page(chromium, str(tmp_path / "profile"), width=1280, height=900)
    try:
        events = page.open((demo_run / "report.html").resolve().as_uri())
        title = page.evaluate("document.title")
        n_conditions = page.evaluate("document.querySelectorAll('article.condition').length")
        n_images = page.evaluate("Array.from(document.images).filter(i => i.complete && i.naturalWidth > 0).length")
        shot = page.screenshot(str(tmp_path / "report.png"))
        pdf = page.pdf(str(tmp_path / "report.pdf"))
        errors = console_errors(events)
        urls = requests(events)
        # a connection that sends nothing is a speculative preconnect, not a request
        trapped = [line for line in page.proxy.received
                   if not line.startswith(BROWSER_OWN_CONNECTIONS) and line != NO_DATA]
        # control: a page that loads from outside and logs an error must be caught by both checks
        control = tmp_path / "control.html"
        control.write_text(
            '<!doctype html><title>control</title><img src="http://damper-report-test.invalid/x.png">'
            '<script>console.error("control error")</script>',
            encoding="utf-8",
        )
        control_events = page.open(control.as_uri())
        time.sleep(0.2)
        control_trapped = list(page.proxy.received)
    finally:
        page.close()
    assert "Utility single, aft CG extension" in title
    assert n_conditions == len(DEMO_CONDITIONS) and n_images == 4 * len(DEMO_CONDITIONS)
    assert errors == [], errors
    outside = [u[:80] for u in urls if not u.startswith(("file:", "data:", "about:"))]
    assert outside == [] and trapped == [], (outside, trapped)
    assert "google" not in (demo_run / "report.html").read_text(encoding="utf-8").lower()
    size, colours, dark = _non_blank(shot)
    assert size == (1280, 900) and colours > 20 and dark > 0.02, (size, colours, dark)
    data = open(pdf, "rb").read()
    assert data.startswith(b"%PDF") and len(re.findall(rb"/Type\s*/Page\b", data)) > 5
    # the checks are live: the control page's request reached the trap and its error was seen
    assert any("damper-report-test.invalid" in line for line in control_trapped), control_trapped
    assert any("control error" in e for e in console_errors(control_events))


# ---------------------------------------------------------------------------------
# a tiny DevTools client (standard library only)
# ---------------------------------------------------------------------------------
CHROMIUM_NAMES = ("chromium", "chromium-browser", "google-chrome", "chrome")
#: Flags for running as root in a container with no network (see the machine notes).
BASE_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-extensions",
    "--disable-default-apps",
    "--mute-audio",
    "--hide-scrollbars",
    "--disable-features=NetworkTimeServiceQuerying,OptimizationHints,OptimizationGuideModelDownloading,"
    "MediaRouter,Translate,AutofillServerCommunication,DialMediaRouteProvider",
    "--disable-domain-reliability",
    "--no-pings",
    "--disable-client-side-phishing-detection",
    "--metrics-recording-only",
    "--password-store=basic",
    "--disable-breakpad",
)


# Chromium (156 seen here) preconnects each new browser context to its default search
# engine before any page is loaded; no flag turns it off. Those lines are the browser's,
# not the report's (the report is also checked to name no such host).
BROWSER_OWN_CONNECTIONS = ("CONNECT www.google.com:443 ", "CONNECT accounts.google.com:443 ")
NO_DATA = "(connection, no data)"


def require_chromium():
    """The Chromium binary; skips without one, except where DAMPER_REQUIRE_BROWSER is set (CI sets
    it, so the browser checks run there and never skip silently)."""
    chromium = find_chromium()
    if chromium is None:
        if os.environ.get("DAMPER_REQUIRE_BROWSER"):
            pytest.fail("DAMPER_REQUIRE_BROWSER is set but no Chromium binary was found (apt-get install chromium)")
        pytest.skip("no Chromium binary found (apt-get install chromium); the browser check needs one")
    return chromium


def find_chromium():
    """Path of a Chromium binary, or None."""
    env = os.environ.get("DAMPER_CHROMIUM")
    if env and os.path.isfile(env):
        return env
    for name in CHROMIUM_NAMES:
        path = shutil.which(name)
        if path:
            return path
    return "/usr/bin/chromium" if os.path.isfile("/usr/bin/chromium") else None


class TrapProxy:
    """A loopback TCP server that records every connection made to it (and answers 502)."""

    def __init__(self):
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.sock.bind(("127.0.0.1", 0))
        self.sock.listen(16)
        self.sock.settimeout(0.2)
        self.port = self.sock.getsockname()[1]
        self.received = []  # first line of every connection
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._serve, daemon=True)
        self._thread.start()

    def _serve(self):
        while not self._stop.is_set():
            try:
                conn, _ = self.sock.accept()
            except (socket.timeout, OSError):
                continue
            with conn:
                conn.settimeout(1.0)
                try:
                    data = conn.recv(4096)
                except OSError:
                    data = b""
                self.received.append(data.split(b"\r\n", 1)[0].decode("latin-1") or NO_DATA)
                try:
                    conn.sendall(b"HTTP/1.1 502 Bad Gateway\r\nContent-Length: 0\r\nConnection: close\r\n\r\n")
                except OSError:
                    pass

    def close(self):
        self._stop.set()
        self._thread.join(timeout=2)
        self.sock.close()


class WebSocket:
    """Just enough of RFC 6455 for a DevTools session (text frames, client masking)."""

    def __init__(self, url, timeout=30.0):
        m = re.match(r"ws://([^/:]+):(\d+)(/.*)", url)
        host, port, path = m.group(1), int(m.group(2)), m.group(3)
        self.sock = socket.create_connection((host, port), timeout=timeout)
        key = base64.b64encode(os.urandom(16)).decode()
        self.sock.sendall(
            (
                f"GET {path} HTTP/1.1\r\nHost: {host}:{port}\r\nUpgrade: websocket\r\nConnection: Upgrade\r\n"
                f"Sec-WebSocket-Key: {key}\r\nSec-WebSocket-Version: 13\r\n\r\n"
            ).encode()
        )
        head = b""
        while b"\r\n\r\n" not in head:
            chunk = self.sock.recv(4096)
            if not chunk:
                raise ConnectionError("DevTools closed the connection during the handshake")
            head += chunk
        head, self._buf = head.split(b"\r\n\r\n", 1)
        if b" 101 " not in head.split(b"\r\n", 1)[0]:
            raise ConnectionError(f"DevTools handshake refused: {head[:200]!r}")

    def send(self, text):
        data = text.encode()
        n = len(data)
        if n < 126:
            header = struct.pack("!BB", 0x81, 0x80 | n)
        elif n < 1 << 16:
            header = struct.pack("!BBH", 0x81, 0x80 | 126, n)
        else:
            header = struct.pack("!BBQ", 0x81, 0x80 | 127, n)
        mask = os.urandom(4)
        masked = bytes(b ^ mask[i % 4] for i, b in enumerate(data))
        self.sock.sendall(header + mask + masked)

    def _read(self, n):
        while len(self._buf) < n:
            chunk = self.sock.recv(1 << 20)
            if not chunk:
                raise ConnectionError("DevTools connection closed")
            self._buf += chunk
        out, self._buf = self._buf[:n], self._buf[n:]
        return out

    def recv(self):
        parts = []
        while True:
            b0, b1 = self._read(2)
            opcode, n = b0 & 0x0F, b1 & 0x7F
            if n == 126:
                n = struct.unpack("!H", self._read(2))[0]
            elif n == 127:
                n = struct.unpack("!Q", self._read(8))[0]
            mask = self._read(4) if b1 & 0x80 else None
            payload = self._read(n)
            if mask:
                payload = bytes(b ^ mask[i % 4] for i, b in enumerate(payload))
            if opcode == 0x8:
                raise ConnectionError("DevTools closed the websocket")
            if opcode in (0x9, 0xA):  # ping/pong: ignore
                continue
            parts.append(payload)
            if b0 & 0x80:
                return b"".join(parts).decode("utf-8")

    def close(self):
        try:
            self.sock.close()
        except OSError:
            pass


class Page:
    """One headless Chromium with one page, a trap proxy and event logs."""

    def __init__(self, chromium, profile_dir, width=1280, height=900, timeout=30.0):
        self.proxy = TrapProxy()  # the page's proxy: must see nothing from the report
        self.background = TrapProxy()  # the browser's own services (update checks, sign-in): ignored
        self.timeout = timeout
        self.events = []
        self._id = 0
        args = [
            chromium,
            *BASE_FLAGS,
            f"--user-data-dir={profile_dir}",
            f"--window-size={width},{height}",
            "--remote-debugging-port=0",
            "--remote-debugging-address=127.0.0.1",
            f"--proxy-server=http://127.0.0.1:{self.background.port}",
            "--proxy-bypass-list=<-loopback>",
            "--host-resolver-rules=MAP * ~NOTFOUND , EXCLUDE 127.0.0.1",
            "--enable-logging=stderr",
            "--v=0",
            "about:blank",
        ]
        self.proc = subprocess.Popen(args, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        self.stderr_lines = []
        url = self._devtools_url()
        self.ws = WebSocket(url, timeout=timeout)
        # The page lives in its own browser context whose proxy is our trap, so every
        # request the page makes (and only the page) reaches self.proxy.
        context = self.call(
            "Target.createBrowserContext",
            proxyServer=f"http://127.0.0.1:{self.proxy.port}",
            proxyBypassList="<-loopback>",
        )["browserContextId"]
        target = self.call("Target.createTarget", url="about:blank", browserContextId=context)["targetId"]
        self.session = self.call("Target.attachToTarget", targetId=target, flatten=True)["sessionId"]
        for domain in ("Page", "Runtime", "Log", "Network"):
            self.call(f"{domain}.enable", session=True)
        self.call("Emulation.setDeviceMetricsOverride", session=True, width=width, height=height,
                  deviceScaleFactor=1, mobile=False)

    def _devtools_url(self):
        found = {}

        def reader():
            for raw in self.proc.stderr:
                line = raw.decode("utf-8", "replace").rstrip()
                self.stderr_lines.append(line)
                m = re.search(r"DevTools listening on (ws://\S+)", line)
                if m and "url" not in found:
                    found["url"] = m.group(1)

        threading.Thread(target=reader, daemon=True).start()
        end = time.monotonic() + self.timeout
        while "url" not in found:
            if self.proc.poll() is not None or time.monotonic() > end:
                raise RuntimeError("Chromium did not start its DevTools endpoint:\n" + "\n".join(self.stderr_lines[-20:]))
            time.sleep(0.05)
        return found["url"]

    def call(self, method, session=False, **params):
        self._id += 1
        msg = {"id": self._id, "method": method, "params": params}
        if session:
            msg["sessionId"] = self.session
        self.ws.send(json.dumps(msg))
        end = time.monotonic() + self.timeout
        while time.monotonic() < end:
            reply = json.loads(self.ws.recv())
            if reply.get("id") == self._id:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                return reply.get("result", {})
            self.events.append(reply)
        raise TimeoutError(method)

    def wait_for(self, method, timeout=None):
        end = time.monotonic() + (timeout or self.timeout)
        for e in self.events:
            if e.get("method") == method and not e.get("_seen"):
                e["_seen"] = True
                return e
        while time.monotonic() < end:
            self.ws.sock.settimeout(max(0.05, end - time.monotonic()))
            try:
                e = json.loads(self.ws.recv())
            except socket.timeout:
                break
            finally:
                self.ws.sock.settimeout(self.timeout)
            self.events.append(e)
            if e.get("method") == method:
                e["_seen"] = True
                return e
        raise TimeoutError(method)

    def drain(self, seconds):
        """Collect events for `seconds` more."""
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            self.ws.sock.settimeout(max(0.05, end - time.monotonic()))
            try:
                self.events.append(json.loads(self.ws.recv()))
            except socket.timeout:
                break
        self.ws.sock.settimeout(self.timeout)

    def open(self, url):
        """Navigate, wait for the load event, and return the events this page produced."""
        start = len(self.events)
        self.call("Page.navigate", session=True, url=url)
        self.wait_for("Page.loadEventFired")
        self.drain(0.5)
        return self.events[start:]

    def evaluate(self, expression):
        r = self.call("Runtime.evaluate", session=True, expression=expression, returnByValue=True)
        return r["result"].get("value")

    def screenshot(self, path, full_page=False):
        params = {"format": "png"}
        if full_page:
            m = self.call("Page.getLayoutMetrics", session=True)["cssContentSize"]
            params.update(captureBeyondViewport=True, clip={"x": 0, "y": 0, "width": m["width"], "height": m["height"], "scale": 1})
        data = base64.b64decode(self.call("Page.captureScreenshot", session=True, **params)["data"])
        with open(path, "wb") as fh:
            fh.write(data)
        return path

    def pdf(self, path):
        r = self.call("Page.printToPDF", session=True, printBackground=True, preferCSSPageSize=True,
                      displayHeaderFooter=False)
        with open(path, "wb") as fh:
            fh.write(base64.b64decode(r["data"]))
        return path

    def close(self):
        try:
            self.call("Browser.close")
        except Exception:  # noqa: BLE001 - closing anyway
            pass
        self.ws.close()
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(timeout=10)
        self.proxy.close()
        self.background.close()


def console_errors(events):
    """Console errors, uncaught exceptions and error log entries among DevTools events."""
    out = []
    for e in events:
        m, p = e.get("method"), e.get("params", {})
        if m == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
            out.append("console: " + " ".join(str(a.get("value", a.get("description", ""))) for a in p.get("args", [])))
        elif m == "Runtime.exceptionThrown":
            d = p.get("exceptionDetails", {})
            out.append("uncaught: " + str(d.get("exception", {}).get("description") or d.get("text")))
        elif m == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
            out.append("log: " + p["entry"].get("text", ""))
    return out


def requests(events):
    """URLs of every request the page made (Network.requestWillBeSent)."""
    return [e["params"]["request"]["url"] for e in events if e.get("method") == "Network.requestWillBeSent"]
