"""Run Debian's Chromium headless on a local file with every network request caught, and read the
DOM it prints back into a small tree.

Network: Chromium is told to send every request, loopback included, through a proxy that is a
TCP listener of ours on 127.0.0.1 (`NetworkWatch`). The listener refuses every request (502) and
writes down its first line; name lookups are refused as well. So a page that tries to fetch
anything shows up in `NetworkWatch.requests`, and nothing leaves the machine.

Chromium itself asks a few fixed hosts for the time, for an on-demand component and for the
signed-in accounts as it starts, whatever the page, and no switch stops all of them. Those hosts
are listed in `BROWSER_OWN_HOSTS` and set apart by `NetworkWatch.page_requests`; as every request
is refused, none of them can lead on to another.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import tempfile
import threading
from dataclasses import dataclass, field
from html.parser import HTMLParser
from pathlib import Path

DEBIAN_CHROMIUM = Path("/usr/bin/chromium")
TIMEOUT_S = 60

# Chromium's own traffic (updates, sync, metrics, default apps) is switched off where a switch
# exists, so that the listener hears little but what the page asks for.
QUIET_FLAGS = (
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
    "--metrics-recording-only",
    "--disable-default-apps",
    "--disable-extensions",
    "--disable-domain-reliability",
    "--disable-client-side-phishing-detection",
    "--no-default-browser-check",
    "--no-pings",
    "--disable-features=NetworkTimeServiceQuerying,Translate,OptimizationHints,MediaRouter",
)

# Hosts Chromium contacts on its own at start-up (seen with Debian's chromium 150 and 156 and the
# flags above, also when opening a page that requests nothing); exact names only, so a page that
# fetches anything else, fonts from a CDN included, is still caught.
BROWSER_OWN_HOSTS = frozenset({
    "accounts.google.com",     # signed-in account list
    "clients2.google.com",     # network time
    "update.googleapis.com",   # component update check
    "redirector.gvt1.com",     # component download
    "www.google.com",          # chromium 150, at start-up, also for a blank page
})


def find_chromium() -> str | None:
    """Path of the Chromium binary: Debian's /usr/bin/chromium, else `chromium` on PATH."""
    if DEBIAN_CHROMIUM.is_file() and os.access(DEBIAN_CHROMIUM, os.X_OK):
        return str(DEBIAN_CHROMIUM)
    return shutil.which("chromium")


def browser_required() -> bool:
    """True under CI (environment variable CI set to anything but empty, 0, false or no)."""
    return os.environ.get("CI", "").strip().lower() not in {"", "0", "false", "no"}


class NetworkWatch:
    """A loopback TCP listener used as Chromium's proxy; it records every connection made to it."""

    def __init__(self) -> None:
        self._server = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self._server.bind(("127.0.0.1", 0))
        self._server.listen(32)
        self._server.settimeout(0.1)
        self.port: int = self._server.getsockname()[1]
        self.requests: list[str] = []
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._serve, name="network-watch", daemon=True)
        self._thread.start()

    def __enter__(self) -> NetworkWatch:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _serve(self) -> None:
        while not self._stop.is_set():
            try:
                conn, _ = self._server.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            self._record(conn)

    def _record(self, conn: socket.socket) -> None:
        with conn:
            conn.settimeout(1.0)
            try:
                head = conn.recv(2048)
            except OSError:
                head = b""
            line = head.split(b"\r\n", 1)[0].decode("latin-1") or "(connection without a request)"
            with self._lock:
                self.requests.append(line)
            try:
                conn.sendall(b"HTTP/1.1 502 Bad Gateway\r\nContent-Length: 0\r\n"
                             b"Connection: close\r\n\r\n")
            except OSError:
                pass

    def page_requests(self) -> list[str]:
        """Requests other than Chromium's own start-up traffic (see BROWSER_OWN_HOSTS)."""
        return [r for r in self.requests if request_host(r) not in BROWSER_OWN_HOSTS]

    def close(self) -> None:
        """Stop listening; connections still waiting in the backlog are recorded first."""
        if self._stop.is_set():
            return
        self._stop.set()
        self._thread.join(timeout=5)
        self._server.setblocking(False)
        while True:
            try:
                conn, _ = self._server.accept()
            except OSError:  # BlockingIOError: the backlog is empty
                break
            conn.setblocking(True)
            self._record(conn)
        self._server.close()


def request_host(line: str) -> str:
    """Host named by a proxy request line: `CONNECT host:443 ...` or `GET http://host/... ...`."""
    parts = line.split()
    if len(parts) < 3 or not parts[2].startswith("HTTP/"):
        return ""  # no request line: counted as the page's, since nothing says otherwise
    target = parts[1]
    if "://" in target:
        target = target.split("://", 1)[1].split("/", 1)[0]
    host = target.rsplit("@", 1)[-1]
    if host.startswith("["):
        return host[1:].split("]", 1)[0].lower()
    return host.split(":", 1)[0].lower()


@dataclass
class Run:
    """What one Chromium run printed, and how it ended."""

    command: list[str]
    returncode: int
    stdout: str
    stderr: str

    def explain(self) -> str:
        return (f"chromium exited {self.returncode}\ncommand: {' '.join(self.command)}\n"
                f"stderr (last lines):\n" + "\n".join(self.stderr.splitlines()[-15:]))


def run_chromium(binary: str, url: str, *mode: str, workdir: Path, proxy_port: int,
                 timeout: float = TIMEOUT_S) -> Run:
    """Open `url` once in a fresh profile under `workdir`, every request sent to `proxy_port`."""
    workdir.mkdir(parents=True, exist_ok=True)
    profile = tempfile.mkdtemp(prefix="profile-", dir=workdir)
    command = [
        binary, "--headless", "--disable-gpu", "--no-sandbox", f"--user-data-dir={profile}",
        f"--proxy-server=http://127.0.0.1:{proxy_port}",
        "--proxy-bypass-list=<-loopback>",  # loopback goes through the proxy too
        "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1",
        *QUIET_FLAGS, *mode, url,
    ]
    env = dict(os.environ, HOME=profile, XDG_CONFIG_HOME=profile, XDG_CACHE_HOME=profile)
    proc = subprocess.Popen(command, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env=env, start_new_session=True)
    try:
        out, err = proc.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(proc.pid, signal.SIGKILL)  # the group is Chromium's own, started just above
        out, err = proc.communicate()
        raise AssertionError(f"chromium did not finish within {timeout:.0f} s: "
                             f"{' '.join(command)}\n{err.decode(errors='replace')[-2000:]}")
    return Run(command, proc.returncode, out.decode("utf-8", errors="replace"),
               err.decode("utf-8", errors="replace"))


# ---------------------------------------------------------------------------------------------
# A small DOM tree from the HTML Chromium prints

HIDDEN = frozenset({"head", "script", "style", "template", "noscript"})
VOID = frozenset({"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta",
                  "param", "source", "track", "wbr"})


@dataclass
class Element:
    tag: str
    attrs: dict[str, str]
    parent: Element | None
    children: list[Element] = field(default_factory=list)
    chunks: list[str] = field(default_factory=list)

    @property
    def text(self) -> str:
        """Every piece of text inside the element, in order (script and style text included)."""
        return "".join(self.chunks)

    def iter(self, tag: str | None = None):
        for child in self.children:
            if tag is None or child.tag == tag:
                yield child
            yield from child.iter(tag)

    def classes(self) -> set[str]:
        return set(self.attrs.get("class", "").split())


class _TreeBuilder(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.root = Element("#document", {}, None)
        self.stack = [self.root]
        self.visible: list[str] = []

    def handle_starttag(self, tag, attrs):
        element = Element(tag, {k: (v or "") for k, v in attrs}, self.stack[-1])
        self.stack[-1].children.append(element)
        if tag not in VOID:
            self.stack.append(element)

    def handle_startendtag(self, tag, attrs):
        element = Element(tag, {k: (v or "") for k, v in attrs}, self.stack[-1])
        self.stack[-1].children.append(element)

    def handle_endtag(self, tag):
        for depth in range(len(self.stack) - 1, 0, -1):
            if self.stack[depth].tag == tag:
                del self.stack[depth:]
                return

    def handle_data(self, data):
        for element in self.stack:
            element.chunks.append(data)
        if not any(element.tag in HIDDEN for element in self.stack):
            self.visible.append(data)


@dataclass
class Document:
    root: Element
    visible_text: str  # text a reader sees: outside head, script, style, template, noscript

    def iter(self, tag: str | None = None):
        return self.root.iter(tag)


def parse_dom(html: str) -> Document:
    """The document tree of `html`; text and attribute values are unescaped (`&lt;` is `<`)."""
    builder = _TreeBuilder()
    builder.feed(html)
    builder.close()
    return Document(builder.root, "".join(builder.visible))


