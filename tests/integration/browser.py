#!/usr/bin/python3
"""Open an HTML report in headless Chromium, screenshot it, and report what
a reader would see: whether each image loaded, and the summary table.

    browser.py REPORT.html SCREENSHOT.png      (prints the result as JSON)

As a module (tests/integration is on sys.path of the integration tests):

    from browser import check_report, BrowserError
    result = check_report("study/report.html", "study/report_screenshot.png")

check_report(html_path, screenshot_path, timeout=60.0, width=1200) -> dict

  Opens html_path (a file on disk, loaded as file://; nothing is served)
  in a fresh headless Chromium with its own temporary profile, waits for
  the load event and for every <img> to finish loading or fail, takes a
  full-page PNG screenshot (the whole document height at `width` CSS px,
  scale 1) into screenshot_path, closes the browser and returns:

    "images":          one dict per <img>, in document order:
                         "src"     the src attribute, data: URIs cut to
                                   their first 60 characters;
                         "alt"     the alt attribute ("" when absent);
                         "loaded"  img.complete and img.naturalWidth > 0
                                   (a broken or undecodable image is False);
                         "natural_width", "natural_height"  in px (0 when
                                   not loaded);
    "summary_rows":    the rows of the element with id="summary" (a
                       <table>), in document order, header rows included,
                       each row the list of its cells' rendered text
                       (innerText, whitespace collapsed, stripped); None
                       when the page has no element with id="summary";
    "title":           document.title;
    "screenshot":      screenshot_path, as given;
    "screenshot_size": [width, height] of the PNG in px;
    "console_errors":  messages of uncaught exceptions and console.error
                       calls while the page loaded (normally empty);
    "chromium":        the browser's product string ("Chrome/156...");
    "start_seconds":   wall time from launch until the DevTools endpoint
                       answered (the Chromium start-up);
    "total_seconds":   wall time of the whole call.

  Raises BrowserError with a message saying what to do when Chromium is
  not installed (Debian package `chromium`), when the HTML file does not
  exist, or when the browser does not start, load the page or answer within
  `timeout` seconds (each stage has the full timeout). The browser process
  group started here is always ended, also on errors. The Chromium binary
  is `chromium` on PATH, or the one named by the environment variable
  AEROSECT_CHROMIUM. Packages: chromium, python3-websocket (Debian 12).
"""

import base64
import json
import os
import shutil
import signal
import struct
import subprocess
import sys
import tempfile
import time
import urllib.parse
import urllib.request

# Flags of the brief: no sandbox (containers, root), no GPU, and no network
# traffic of the browser's own (updates, sync, QUIC, first-run pages).
CHROMIUM_FLAGS = [
    "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
    "--disable-background-networking", "--disable-component-update", "--disable-sync",
    "--hide-scrollbars", "--mute-audio", "--remote-debugging-port=0",
    "--remote-allow-origins=*",
]

# Collects what the page shows once it is loaded and every image settled.
PAGE_SCRIPT = r"""
(async () => {
  const images = Array.from(document.images);
  await Promise.all(images.map(img => img.complete ? null : new Promise(done => {
    img.addEventListener('load', done, {once: true});
    img.addEventListener('error', done, {once: true});
  })));
  const text = el => (el.innerText || el.textContent || '').replace(/\s+/g, ' ').trim();
  const summary = document.getElementById('summary');
  const rows = summary === null ? null :
    Array.from(summary.rows || summary.querySelectorAll('tr')).map(
      row => Array.from(row.cells || row.querySelectorAll('th,td')).map(text));
  return JSON.stringify({
    title: document.title,
    images: images.map(img => {
      const src = img.getAttribute('src') || '';
      const loaded = img.complete && img.naturalWidth > 0;
      return {src: src.startsWith('data:') ? src.slice(0, 60) : src,
              alt: img.getAttribute('alt') || '', loaded: loaded,
              natural_width: loaded ? img.naturalWidth : 0,
              natural_height: loaded ? img.naturalHeight : 0};
    }),
    summary_rows: rows,
  });
})()
"""


class BrowserError(RuntimeError):
    """Chromium missing, not starting, or not answering in time."""


def find_chromium():
    named = os.environ.get("AEROSECT_CHROMIUM")
    if named:
        if not (os.path.isfile(named) and os.access(named, os.X_OK)):
            raise BrowserError(f"AEROSECT_CHROMIUM={named} is not an executable file")
        return named
    for name in ("chromium", "chromium-browser"):
        path = shutil.which(name)
        if path:
            return path
    raise BrowserError("headless Chromium is not installed: no 'chromium' on PATH. On Debian "
                       "install the package: apt-get install chromium python3-websocket "
                       "(tools/test installs both; or set AEROSECT_CHROMIUM to a binary)")


class DevTools:
    """One page's DevTools-protocol connection: send a command, wait for its
    answer (events that arrive meanwhile are kept for wait_event)."""

    def __init__(self, url, timeout):
        import websocket  # python3-websocket

        self.socket = websocket.create_connection(url, timeout=timeout, suppress_origin=True)
        self.timeout = timeout
        self.next_id = 0
        self.events = []

    def _receive(self, deadline, what):
        import websocket

        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise BrowserError(f"Chromium did not {what} within {self.timeout:g} s")
        self.socket.settimeout(remaining)
        try:
            return json.loads(self.socket.recv())
        except websocket.WebSocketTimeoutException:
            raise BrowserError(f"Chromium did not {what} within {self.timeout:g} s") from None
        except (websocket.WebSocketException, OSError) as e:
            raise BrowserError(f"the DevTools connection broke while waiting to {what}: {e}") \
                from None

    def call(self, method, **params):
        self.next_id += 1
        self.socket.send(json.dumps({"id": self.next_id, "method": method, "params": params}))
        deadline = time.monotonic() + self.timeout
        while True:
            message = self._receive(deadline, f"answer {method}")
            if message.get("id") == self.next_id:
                if "error" in message:
                    raise BrowserError(f"{method} failed: {message['error'].get('message')}")
                return message.get("result", {})
            if "method" in message:
                self.events.append(message)

    def wait_event(self, method):
        deadline = time.monotonic() + self.timeout
        while True:
            for k, event in enumerate(self.events):
                if event["method"] == method:
                    return self.events.pop(k)
            self.events.append(self._receive(deadline, f"send {method}"))

    def close(self):
        try:
            self.socket.close()
        except Exception:  # closing a broken socket: nothing left to do
            pass


def wait_for_endpoint(process, profile, timeout):
    """The browser writes its DevTools port into the profile directory."""
    port_file = os.path.join(profile, "DevToolsActivePort")
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if process.poll() is not None:
            raise BrowserError(f"Chromium exited with status {process.returncode} at start-up")
        try:
            with open(port_file) as fh:
                lines = fh.read().split()
            if len(lines) >= 2:
                return int(lines[0])
        except (FileNotFoundError, ValueError):
            pass
        time.sleep(0.05)
    raise BrowserError(f"Chromium did not open its DevTools port within {timeout:g} s")


def page_socket_url(port, timeout):
    with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/list", timeout=timeout) as r:
        targets = json.load(r)
    pages = [t for t in targets if t.get("type") == "page" and "webSocketDebuggerUrl" in t]
    if not pages:
        raise BrowserError("Chromium started without a page to drive")
    with urllib.request.urlopen(f"http://127.0.0.1:{port}/json/version", timeout=timeout) as r:
        product = json.load(r).get("Browser", "")
    return pages[0]["webSocketDebuggerUrl"], product


def png_size(data):
    # PNG specification §5.2 signature, §11.2.2 IHDR: width, height at 16..24.
    if data[:8] != b"\x89PNG\r\n\x1a\n":
        raise BrowserError("the screenshot Chromium returned is not a PNG")
    return list(struct.unpack(">II", data[16:24]))


def stop(process, stderr_file):
    """Ends the browser's process group (started here, in its own session)."""
    if process.poll() is None:
        try:
            os.killpg(process.pid, signal.SIGTERM)
            process.wait(timeout=10)
        except (ProcessLookupError, subprocess.TimeoutExpired):
            try:
                os.killpg(process.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            process.wait(timeout=10)
    stderr_file.close()


def check_report(html_path, screenshot_path, timeout=60.0, width=1200):
    start = time.monotonic()
    html_path = os.path.abspath(html_path)
    if not os.path.isfile(html_path):
        raise BrowserError(f"{html_path}: no such file")
    chromium = find_chromium()
    with tempfile.TemporaryDirectory(prefix="aerosect_chromium_") as profile:
        stderr_file = open(os.path.join(profile, "chromium.log"), "w+")
        process = subprocess.Popen(
            [chromium, *CHROMIUM_FLAGS, f"--user-data-dir={profile}",
             f"--window-size={width},900", "about:blank"],
            stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=stderr_file,
            start_new_session=True)
        devtools = None
        try:
            try:
                port = wait_for_endpoint(process, profile, timeout)
                url, product = page_socket_url(port, timeout)
            except BrowserError as e:
                stderr_file.seek(0)
                tail = "".join(stderr_file.readlines()[-8:]).strip()
                raise BrowserError(f"{e}; {chromium} said:\n{tail}" if tail else str(e)) from None
            started = time.monotonic() - start
            devtools = DevTools(url, timeout)

            errors = []
            devtools.call("Page.enable")
            devtools.call("Runtime.enable")
            devtools.call("Emulation.setDeviceMetricsOverride", width=width, height=900,
                          deviceScaleFactor=1, mobile=False)
            file_url = "file://" + urllib.parse.quote(html_path)
            answer = devtools.call("Page.navigate", url=file_url)
            if answer.get("errorText"):
                raise BrowserError(f"{html_path}: Chromium could not open it: "
                                   f"{answer['errorText']}")
            devtools.wait_event("Page.loadEventFired")
            result = devtools.call("Runtime.evaluate", expression=PAGE_SCRIPT, awaitPromise=True,
                                   returnByValue=True, timeout=int(timeout * 1000))
            if "exceptionDetails" in result:
                raise BrowserError("the page script failed: "
                                   f"{result['exceptionDetails'].get('text', '')}")
            page = json.loads(result["result"]["value"])
            for event in devtools.events:
                if event["method"] == "Runtime.exceptionThrown":
                    details = event["params"]["exceptionDetails"]
                    errors.append(details.get("exception", {}).get("description")
                                  or details.get("text", ""))
                elif (event["method"] == "Runtime.consoleAPICalled"
                      and event["params"].get("type") == "error"):
                    errors.append(" ".join(str(a.get("value", a.get("description", "")))
                                           for a in event["params"].get("args", [])))

            # Full page: the document's whole height at the set width.
            metrics = devtools.call("Page.getLayoutMetrics")
            content = metrics.get("cssContentSize") or metrics["contentSize"]
            height = max(1, int(round(content["height"])))
            devtools.call("Emulation.setDeviceMetricsOverride", width=width, height=height,
                          deviceScaleFactor=1, mobile=False)
            shot = devtools.call("Page.captureScreenshot", format="png",
                                 captureBeyondViewport=True,
                                 clip={"x": 0, "y": 0, "width": width, "height": height,
                                       "scale": 1})
            data = base64.b64decode(shot["data"])
            size = png_size(data)
            directory = os.path.dirname(os.path.abspath(screenshot_path))
            os.makedirs(directory, exist_ok=True)
            with open(screenshot_path, "wb") as fh:
                fh.write(data)
            try:
                devtools.call("Browser.close")
            except BrowserError:
                pass  # the browser may close the connection before answering
        finally:
            if devtools is not None:
                devtools.close()
            stop(process, stderr_file)
    return {
        "images": page["images"],
        "summary_rows": page["summary_rows"],
        "title": page["title"],
        "screenshot": screenshot_path,
        "screenshot_size": size,
        "console_errors": errors,
        "chromium": product,
        "start_seconds": started,
        "total_seconds": time.monotonic() - start,
    }


def main(argv):
    if len(argv) != 2:
        print(__doc__.split("\n\n")[1], file=sys.stderr)
        return 2
    try:
        result = check_report(argv[0], argv[1])
    except BrowserError as e:
        print(f"browser: {e}", file=sys.stderr)
        return 1
    print(json.dumps(result, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
