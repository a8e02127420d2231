"""Helpers of the browser tests: find Chromium or skip, a recording proxy, a blank-image check."""

import os
import re
import socket
import threading

import numpy as np
import pytest

from viewer.browser import find_chromium

# the browser's own service traffic (time, updates, accounts): not requests of the page
BROWSER_HOSTS = ("google.com", "googleapis.com", "gstatic.com", "gvt1.com", "googleusercontent.com")


def browser_or_skip():
    if find_chromium() is None:
        if os.environ.get("DRILLAXIS_REQUIRE_BROWSER") == "1":
            pytest.fail("no Chromium on this machine, and DRILLAXIS_REQUIRE_BROWSER=1 (CI installs it)")
        pytest.skip("no Chromium on this machine (apt-get install chromium)")


class Proxy:
    """A local HTTP proxy that records the first line of every request and answers nothing."""

    def __init__(self):
        self.server = socket.socket()
        self.server.bind(("127.0.0.1", 0))
        self.server.listen(64)
        self.address = f"http://127.0.0.1:{self.server.getsockname()[1]}"
        self.lines = []
        threading.Thread(target=self._serve, daemon=True).start()

    def _serve(self):
        while True:
            try:
                connection, _ = self.server.accept()
            except OSError:
                return
            connection.settimeout(2.0)
            try:
                self.lines.append(connection.recv(4096).split(b"\r\n")[0].decode("latin-1"))
            except OSError:
                pass
            connection.close()

    def page_requests(self):
        hosts = []
        for line in self.lines:
            parts = line.split()
            target = parts[1] if len(parts) > 1 else line
            host = re.sub(r"^[a-z]+://", "", target).split("/")[0].split(":")[0]
            if not any(host == h or host.endswith("." + h) for h in BROWSER_HOSTS):
                hosts.append(host)
        return hosts

    def close(self):
        self.server.close()


def non_blank(png):
    """(share of pixels unlike the top-left one, standard deviation) of a PNG."""
    import matplotlib.image as mpimg

    image = mpimg.imread(png)[..., :3]
    background = image[0, 0]
    share = float((np.abs(image - background).sum(axis=2) > 0.05).mean())
    return share, float(image.std())
