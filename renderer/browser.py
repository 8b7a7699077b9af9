"""A headless-browser check of a local HTML page over the Chrome DevTools protocol.

:func:`browser_check` starts headless Chromium with ``--remote-debugging-pipe`` (the
protocol's NUL-separated JSON messages on file descriptors 3 and 4, so no extra
packages and no network port), opens the page, and reports console errors, uncaught
exceptions, failed loads and whether every image decoded.  :func:`find_browser`
locates the executable.  It is used to check study reports (:mod:`renderer.report`);
it builds no pages itself.
"""

from __future__ import annotations

import json
import os
import select
import shutil
import subprocess
import tempfile
import time

from .errors import MagretinaError

BROWSER_NAMES = ("chromium", "chromium-browser", "google-chrome", "chrome")
BROWSER_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run",
                 "--disable-dev-shm-usage")


def find_browser(browser=None):
    """Path of a Chromium executable (given, or the first on PATH); None if none."""
    if browser:
        p = shutil.which(browser) or (browser if os.path.isfile(browser) else None)
        return p
    for n in BROWSER_NAMES:
        p = shutil.which(n)
        if p:
            return p
    return None


class _Pipe:
    """Chromium DevTools protocol over --remote-debugging-pipe (NUL-separated JSON)."""

    def __init__(self, proc, wfd, rfd):
        self.proc, self.wfd, self.rfd = proc, wfd, rfd
        self.buf = b""
        self.next_id = 0
        self.events = []

    def send(self, method, params=None, session=None):
        self.next_id += 1
        msg = {"id": self.next_id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        os.write(self.wfd, json.dumps(msg).encode() + b"\0")
        return self.next_id

    def _read_one(self, deadline):
        while b"\0" not in self.buf:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError
            r, _, _ = select.select([self.rfd], [], [], left)
            if not r:
                raise TimeoutError
            chunk = os.read(self.rfd, 1 << 16)
            if not chunk:
                raise EOFError
            self.buf += chunk
        msg, _, self.buf = self.buf.partition(b"\0")
        return json.loads(msg)

    def call(self, method, params=None, session=None, timeout=20.0):
        i = self.send(method, params, session)
        deadline = time.monotonic() + timeout
        while True:
            m = self._read_one(deadline)
            if m.get("id") == i:
                if "error" in m:
                    raise RuntimeError(f"{method}: {m['error']}")
                return m.get("result", {})
            self.events.append(m)

    def wait_event(self, name, timeout=20.0):
        deadline = time.monotonic() + timeout
        for m in self.events:
            if m.get("method") == name:
                return m
        while True:
            m = self._read_one(deadline)
            self.events.append(m)
            if m.get("method") == name:
                return m

    def drain(self, seconds):
        deadline = time.monotonic() + seconds
        try:
            while True:
                self.events.append(self._read_one(deadline))
        except TimeoutError:
            pass


_IMAGE_PROBE = ("JSON.stringify(Array.from(document.images).map(i => ({src: i.src.slice(0, 60), "
                "complete: i.complete, w: i.naturalWidth, h: i.naturalHeight})))")


def browser_check(html_path, browser=None, timeout_s=30.0) -> dict:
    """Open a local HTML file in headless Chromium and report what happened.

    Returns
    -------
    dict with ``console_errors`` (list of str: console errors, uncaught exceptions,
    failed loads), ``images`` (list of dicts: src prefix, complete, natural w and h),
    ``title`` and ``browser`` (executable and version).

    Raises MagretinaError if no browser is found or it cannot start.
    """
    exe = find_browser(browser)
    if exe is None:
        raise MagretinaError(
            f"no Chromium browser found ({'--browser ' + browser if browser else 'looked for ' + ', '.join(BROWSER_NAMES)} "
            f"on PATH); install one, e.g. 'apt-get install -y chromium'")
    page = os.path.abspath(os.fspath(html_path))
    if not os.path.isfile(page):
        raise MagretinaError(f"report {page}: no such file")
    profile = tempfile.mkdtemp(prefix="magretina-chromium-")
    r_child, w_parent = os.pipe()   # browser reads commands on fd 3
    r_parent, w_child = os.pipe()   # browser writes replies on fd 4

    # The protocol wants the pipe ends on fds 3 and 4.  os.pipe() fds are not inheritable
    # (PEP 446), so with close_fds=False only the two dup2'ed descriptors reach the browser.
    def _fds():
        a, b = os.dup(r_child), os.dup(w_child)
        os.dup2(a, 3)
        os.dup2(b, 4)
        os.set_inheritable(3, True)  # dup2 onto itself (a == 3) leaves the flag unset
        os.set_inheritable(4, True)

    cmd = [exe, *BROWSER_FLAGS, f"--user-data-dir={profile}", "--remote-debugging-pipe",
           "about:blank"]
    errlog_path = os.path.join(profile, "browser-stderr.log")
    errlog = open(errlog_path, "wb")  # a file, not a pipe: a chatty browser must never block
    try:
        proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                stderr=errlog, preexec_fn=_fds, close_fds=False)
    except OSError as exc:
        errlog.close()
        shutil.rmtree(profile, ignore_errors=True)
        for fd in (r_child, w_parent, r_parent, w_child):
            os.close(fd)
        raise MagretinaError(f"browser {exe} cannot start: {exc.strerror or exc}") from None
    os.close(r_child)
    os.close(w_child)
    cdp = _Pipe(proc, w_parent, r_parent)
    try:
        try:
            version = cdp.call("Browser.getVersion", timeout=timeout_s)
            tid = cdp.call("Target.createTarget", {"url": "about:blank"})["targetId"]
            sid = cdp.call("Target.attachToTarget", {"targetId": tid, "flatten": True})["sessionId"]
            for m in ("Page.enable", "Runtime.enable", "Log.enable", "Network.enable"):
                cdp.call(m, session=sid)
            cdp.call("Page.navigate", {"url": "file://" + page}, session=sid)
            cdp.wait_event("Page.loadEventFired", timeout=timeout_s)
            cdp.drain(0.5)
            res = cdp.call("Runtime.evaluate", {"expression": _IMAGE_PROBE, "returnByValue": True},
                           session=sid)
            images = json.loads(res["result"]["value"])
            title = cdp.call("Runtime.evaluate", {"expression": "document.title",
                                                  "returnByValue": True}, session=sid)
            errors = []
            for ev in cdp.events:
                meth, p = ev.get("method"), ev.get("params", {})
                if meth == "Runtime.consoleAPICalled" and p.get("type") in ("error", "assert"):
                    errors.append("console: " + " ".join(str(a.get("value", a.get("description")))
                                                         for a in p.get("args", [])))
                elif meth == "Runtime.exceptionThrown":
                    errors.append("exception: " + str(p.get("exceptionDetails", {}).get("text")))
                elif meth == "Log.entryAdded" and p.get("entry", {}).get("level") == "error":
                    errors.append("log: " + str(p["entry"].get("text")) + " "
                                  + str(p["entry"].get("url", "")))
                elif meth == "Network.loadingFailed":
                    errors.append("load failed: " + str(p.get("errorText")))
            try:
                cdp.call("Browser.close", timeout=5)
            except (TimeoutError, EOFError, RuntimeError):
                pass
        except (TimeoutError, EOFError, OSError, RuntimeError, ValueError, KeyError) as exc:
            errlog.flush()
            with open(errlog_path, "rb") as fh:
                err = fh.read()[-800:]
            raise MagretinaError(f"browser {exe} cannot start or load {page} "
                                 f"({type(exc).__name__}: {exc}); its last output: "
                                 f"{err.decode(errors='replace').strip() or '(none)'}") from None
    finally:
        for fd in (w_parent, r_parent):
            try:
                os.close(fd)
            except OSError:
                pass
        try:
            proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
        errlog.close()
        shutil.rmtree(profile, ignore_errors=True)
    return {"console_errors": errors, "images": images, "title": title["result"].get("value"),
            "browser": f"{exe} ({version.get('product', '?')})"}


__all__ = ["browser_check", "find_browser", "BROWSER_NAMES", "BROWSER_FLAGS"]
