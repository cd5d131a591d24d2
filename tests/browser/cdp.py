"""A small client for Chromium's DevTools protocol over a pipe (`--remote-debugging-pipe`).

One headless browser serves the whole browser check: pages are opened, sized, loaded,
measured (by evaluating JavaScript in them), photographed and printed through the protocol,
so no file under test is changed and no script is added to it. Messages are JSON objects
separated by NUL bytes; Chromium reads them on its fd 3 and writes on its fd 4.

Standard library only.
"""

import base64
import json
import os
import shutil
import subprocess
import tempfile
import time

FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--hide-scrollbars",
    "--remote-debugging-pipe",
]

# File descriptors Chromium's ends of the pipes are parked on before they move to 3 and 4.
_PARK_READ = 100
_PARK_WRITE = 101


class ProtocolError(RuntimeError):
    """A command the browser answered with an error, or a browser that went away."""


class Browser:
    """One headless Chromium with a fresh profile, driven over a pipe."""

    def __init__(self, path, timeout=60.0):
        self.timeout = timeout
        self.profile = tempfile.mkdtemp(prefix="pulseplan-chromium-")
        to_r, to_w = os.pipe()  # we write, Chromium reads (its fd 3)
        from_r, from_w = os.pipe()  # Chromium writes (its fd 4), we read
        os.dup2(to_r, _PARK_READ)
        os.dup2(from_w, _PARK_WRITE)
        for fd in (to_r, from_w):
            os.close(fd)

        def child_fds():
            os.dup2(_PARK_READ, 3)
            os.dup2(_PARK_WRITE, 4)

        self.proc = subprocess.Popen(
            [path, *FLAGS, f"--user-data-dir={self.profile}", "about:blank"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            pass_fds=(3, 4, _PARK_READ, _PARK_WRITE),
            preexec_fn=child_fds,
        )
        os.close(_PARK_READ)
        os.close(_PARK_WRITE)
        self._w = to_w
        self._r = from_r
        self._buf = b""
        self._next = 0
        self.events = []

    # -- transport -------------------------------------------------------------------------
    def _send(self, method, params=None, session=None):
        self._next += 1
        msg = {"id": self._next, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = session
        data = json.dumps(msg).encode() + b"\0"
        while data:
            n = os.write(self._w, data)
            data = data[n:]
        return self._next

    def _read(self):
        while b"\0" not in self._buf:
            chunk = os.read(self._r, 1 << 20)
            if not chunk:
                raise ProtocolError("the browser closed its pipe")
            self._buf += chunk
        i = self._buf.index(b"\0")
        msg, self._buf = self._buf[:i], self._buf[i + 1 :]
        return json.loads(msg)

    def call(self, method, params=None, session=None):
        """Send a command and wait for its answer; events that arrive meanwhile are kept."""
        want = self._send(method, params, session)
        deadline = time.monotonic() + self.timeout
        while True:
            if time.monotonic() > deadline:
                raise ProtocolError(f"{method}: no answer within {self.timeout:.0f} s")
            msg = self._read()
            if msg.get("id") == want:
                if "error" in msg:
                    raise ProtocolError(f"{method}: {msg['error'].get('message')}")
                return msg.get("result", {})
            if "method" in msg:
                self.events.append(msg)

    def wait_event(self, method, session, timeout=None):
        """Wait for an event of a page (already queued or still to come)."""
        deadline = time.monotonic() + (timeout or self.timeout)
        while True:
            for k, e in enumerate(self.events):
                if e.get("method") == method and e.get("sessionId") == session:
                    del self.events[k]
                    return e
            if time.monotonic() > deadline:
                raise ProtocolError(f"no {method} within the timeout")
            msg = self._read()
            if "method" in msg:
                self.events.append(msg)

    # -- pages -----------------------------------------------------------------------------
    def page(self):
        """Open a new tab and attach to it."""
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})[
            "sessionId"
        ]
        return Page(self, target, session)

    def close(self):
        try:
            self.call("Browser.close")
        except (ProtocolError, OSError):
            pass
        try:
            self.proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        for fd in (self._w, self._r):
            try:
                os.close(fd)
            except OSError:
                pass
        shutil.rmtree(self.profile, ignore_errors=True)


class Page:
    """One tab: load a URL at a window size, run JavaScript, photograph, print."""

    def __init__(self, browser, target, session):
        self.b = browser
        self.target = target
        self.session = session
        for domain in ("Page", "Runtime", "Log"):
            self.call(f"{domain}.enable")

    def call(self, method, params=None):
        return self.b.call(method, params, self.session)

    def size(self, width, height, scale=1.0):
        """Set the window size (CSS px) and device scale factor."""
        self.call(
            "Emulation.setDeviceMetricsOverride",
            {"width": width, "height": height, "deviceScaleFactor": scale, "mobile": False},
        )

    def load(self, url, width, height, scale=1.0):
        """Size the window, navigate and wait for the load event; returns console errors."""
        self.size(width, height, scale)
        self.console()  # drop what earlier pages said
        self.call("Page.navigate", {"url": url})
        self.b.wait_event("Page.loadEventFired", self.session)
        self.settle()
        return self.console()

    def settle(self):
        """Wait until layout and painting caught up (two animation frames)."""
        self.eval(
            "new Promise(r => requestAnimationFrame(() => requestAnimationFrame(() => r(true))))"
        )

    def eval(self, expression):
        """Evaluate JavaScript (promises are awaited) and return its value as JSON."""
        r = self.call(
            "Runtime.evaluate",
            {"expression": expression, "returnByValue": True, "awaitPromise": True},
        )
        if "exceptionDetails" in r:
            d = r["exceptionDetails"]
            text = d.get("exception", {}).get("description") or d.get("text")
            raise ProtocolError(f"script failed: {text}")
        return r["result"].get("value")

    def console(self):
        """Errors the page reported since the last call: uncaught exceptions, console.error
        and error-level log entries."""
        bad = []
        keep = []
        for e in self.b.events:
            if e.get("sessionId") != self.session:
                keep.append(e)
                continue
            m, p = e.get("method"), e.get("params", {})
            if m == "Runtime.exceptionThrown":
                bad.append(p["exceptionDetails"].get("text", "exception"))
            elif m == "Runtime.consoleAPICalled" and p.get("type") == "error":
                bad.append(" ".join(str(a.get("value", "")) for a in p.get("args", [])))
            elif m == "Log.entryAdded" and p["entry"].get("level") == "error":
                bad.append(p["entry"].get("text", "log error"))
        self.b.events = keep
        return bad

    def screenshot(self, path, clip, scale=1.0):
        """Photograph a region (CSS px: x, y, width, height) at a scale; writes a PNG and
        returns its bytes base64-encoded."""
        x, y, w, h = clip
        r = self.call(
            "Page.captureScreenshot",
            {
                "format": "png",
                "captureBeyondViewport": True,
                "clip": {"x": x, "y": y, "width": w, "height": h, "scale": scale},
            },
        )
        data = r["data"]
        with open(path, "wb") as f:
            f.write(base64.b64decode(data))
        return data

    def pdf(self, path):
        """Print the page as the browser would on paper (the page's own @page size)."""
        r = self.call(
            "Page.printToPDF",
            {"preferCSSPageSize": True, "printBackground": True, "displayHeaderFooter": False},
        )
        with open(path, "wb") as f:
            f.write(base64.b64decode(r["data"]))

    def media(self, kind):
        """Emulate a CSS media type ("print", "screen"; "" for none)."""
        self.call("Emulation.setEmulatedMedia", {"media": kind})

    def close(self):
        try:
            self.b.call("Target.closeTarget", {"targetId": self.target})
        except ProtocolError:
            pass
