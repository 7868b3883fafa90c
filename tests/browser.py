"""A small headless-Chromium driver for the page tests: DevTools protocol over a pipe, stdlib only.

Chromium (Debian's `chromium` package, installed by `.ci/run`) is started with
``--remote-debugging-pipe``: commands go in on file descriptor 3 and replies
come out on descriptor 4, as JSON messages ended by a NUL byte. No port is
opened and nothing but local files is loaded.
"""

from __future__ import annotations

import base64
import fcntl
import json
import os
import select
import shutil
import subprocess
import tempfile
import time
from pathlib import Path
from typing import Any

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


def find_chromium() -> str | None:
    """The Chromium to use: $MASKPREP_CHROMIUM, else `chromium` or `chromium-browser` on PATH."""
    given = os.environ.get("MASKPREP_CHROMIUM")
    if given:
        return given
    return shutil.which("chromium") or shutil.which("chromium-browser")


class Browser:
    """One headless Chromium with one page: ``with Browser(path) as b: b.open(url, 1400)``."""

    def __init__(self, executable: str, *, timeout: float = 20.0) -> None:
        self.timeout = timeout
        self.profile = tempfile.mkdtemp(prefix="maskprep-chromium-")
        cmd_r, self._cmd_w = os.pipe()
        self._res_r, res_w = os.pipe()

        # In the child: command pipe on fd 3, reply pipe on fd 4 (dup2 makes them inheritable;
        # every other descriptor Python opens is not, so close_fds=False passes only these two).
        def wire() -> None:
            a = fcntl.fcntl(cmd_r, fcntl.F_DUPFD, 10)
            b = fcntl.fcntl(res_w, fcntl.F_DUPFD, 10)
            os.dup2(a, 3)
            os.dup2(b, 4)

        self.proc = subprocess.Popen(
            [executable, *FLAGS, f"--user-data-dir={self.profile}", "about:blank"],
            stdin=subprocess.DEVNULL,
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            preexec_fn=wire,
            close_fds=False,
        )
        os.close(cmd_r)
        os.close(res_w)
        self._buf = b""
        self._next = 0
        self.events: list[dict[str, Any]] = []
        target = self.call("Target.createTarget", url="about:blank")["targetId"]
        self.session = self.call("Target.attachToTarget", targetId=target, flatten=True)[
            "sessionId"
        ]
        self.call("Page.enable", session=True)
        self.call("Runtime.enable", session=True)

    def __enter__(self) -> Browser:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        try:
            if self.proc.poll() is None:
                try:
                    self._send("Browser.close", {}, None)
                    self.proc.wait(timeout=5)
                except (OSError, subprocess.TimeoutExpired):
                    self.proc.kill()
                    self.proc.wait(timeout=5)
        finally:
            for fd in (self._cmd_w, self._res_r):
                try:
                    os.close(fd)
                except OSError:
                    pass
            shutil.rmtree(self.profile, ignore_errors=True)

    # protocol -------------------------------------------------------------------------------
    def _send(self, method: str, params: dict[str, Any], session: str | None) -> int:
        self._next += 1
        msg: dict[str, Any] = {"id": self._next, "method": method, "params": params}
        if session:
            msg["sessionId"] = session
        os.write(self._cmd_w, json.dumps(msg).encode() + b"\0")
        return self._next

    def _read(self, deadline: float) -> dict[str, Any]:
        while b"\0" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0 or self.proc.poll() is not None:
                raise TimeoutError(
                    "chromium did not answer in time" if left <= 0 else "chromium exited"
                )
            ready, _, _ = select.select([self._res_r], [], [], left)
            if ready:
                chunk = os.read(self._res_r, 1 << 20)
                if not chunk:
                    raise RuntimeError("chromium closed the debugging pipe")
                self._buf += chunk
        raw, self._buf = self._buf.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method: str, *, session: bool = False, **params: Any) -> dict[str, Any]:
        """Send one command and return its result (events that arrive meanwhile are kept)."""
        ident = self._send(method, params, self.session if session else None)
        deadline = time.monotonic() + self.timeout
        while True:
            msg = self._read(deadline)
            if msg.get("id") == ident:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            self.events.append(msg)

    def wait_event(self, method: str) -> dict[str, Any]:
        deadline = time.monotonic() + self.timeout
        while True:
            for i, ev in enumerate(self.events):
                if ev.get("method") == method:
                    return self.events.pop(i)
            self.events.append(self._read(deadline))

    # pages ----------------------------------------------------------------------------------
    def open(self, path: Path, width: int, height: int = 900) -> None:
        """Load a local file in a window ``width`` CSS pixels wide."""
        self.call(
            "Emulation.setDeviceMetricsOverride",
            session=True,
            width=width,
            height=height,
            deviceScaleFactor=1,
            mobile=False,
        )
        self.events.clear()
        self.call("Page.navigate", session=True, url=path.resolve().as_uri())
        self.wait_event("Page.loadEventFired")

    def evaluate(self, expression: str) -> Any:
        result = self.call(
            "Runtime.evaluate", session=True, expression=expression, returnByValue=True
        )
        if "exceptionDetails" in result:
            raise RuntimeError(f"script failed: {result['exceptionDetails']}")
        return result["result"].get("value")

    def screenshot(
        self, out: Path, width: int, *, top: int = 0, height: int | None = None
    ) -> Path:
        """A PNG, ``width`` pixels wide: the whole page, or ``height`` pixels from ``top``."""
        full = int(self.evaluate("document.documentElement.scrollHeight"))
        tall = min(full - top if height is None else height, 16000)
        shot = self.call(
            "Page.captureScreenshot",
            session=True,
            format="png",
            captureBeyondViewport=True,
            clip={"x": 0, "y": top, "width": width, "height": tall, "scale": 1},
        )
        out.write_bytes(base64.b64decode(shot["data"]))
        return out


#: Measures every table box, chart and chart text of the loaded page, in CSS pixels.
MEASURE = r"""(() => {
  const doc = document.documentElement;
  const out = {innerWidth: window.innerWidth, pageWidth: doc.scrollWidth, tables: [], charts: []};
  for (const wrap of document.querySelectorAll('.tablewrap')) {
    const table = wrap.querySelector('table');
    const cap = table.querySelector('caption');
    const heads = [...table.querySelectorAll('th')].map(h => h.textContent);
    out.tables.push({section: (wrap.closest('section') || {}).id || '',
                     caption: cap ? cap.textContent : '',
                     headers: heads, box: wrap.clientWidth, content: wrap.scrollWidth,
                     right: wrap.getBoundingClientRect().right});
  }
  for (const svg of document.querySelectorAll('svg.chart')) {
    const box = svg.getBoundingClientRect();
    const holder = svg.parentElement.getBoundingClientRect();
    const vb = svg.viewBox.baseVal;
    const outside = [];
    for (const t of svg.querySelectorAll('text')) {
      const b = t.getBBox();
      const m = t.getCTM();  // text may be rotated: map its box corners into the viewBox
      const x2 = b.x + b.width, y2 = b.y + b.height;
      const pts = [[b.x, b.y], [x2, b.y], [b.x, y2], [x2, y2]]
        .map(([x, y]) => { const p = new DOMPoint(x, y).matrixTransform(m);
                           const s = svg.getCTM().inverse(); return p.matrixTransform(s); });
      const xs = pts.map(p => p.x), ys = pts.map(p => p.y);
      if (Math.min(...xs) < -1 || Math.max(...xs) > vb.width + 1 || Math.min(...ys) < -1 ||
          Math.max(...ys) > vb.height + 1) outside.push(t.textContent);
    }
    out.charts.push({title: (svg.querySelector('title') || {}).textContent || '', width: box.width,
                     right: box.right, holderRight: holder.right, outside: outside});
  }
  return out;
})()"""
