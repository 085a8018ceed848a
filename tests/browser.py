"""Make sure the browser tests have what they need: Debian's chromium and chromium-driver.

Run as ``python -m tests.browser`` by the README's test command. Installs the two packages
with apt-get when they are missing (as root, as CI runs); otherwise says how to.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys


#: Headless flags for Debian's Chromium on a closed network (no background connections, no
#: look-ups beyond this machine); shared by the browser tests and bench/bench_dashboard.py.
CHROMIUM_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--no-first-run", "--disable-quic", "--window-size=1400,1800",
                  "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1, EXCLUDE localhost")


def chromium_options():
    """Selenium options for /usr/bin/chromium with CHROMIUM_FLAGS."""
    from selenium.webdriver.chrome.options import Options

    options = Options()
    options.binary_location = shutil.which("chromium") or "/usr/bin/chromium"
    for flag in CHROMIUM_FLAGS:
        options.add_argument(flag)
    return options


def main() -> int:
    if shutil.which("chromium") and shutil.which("chromedriver"):
        return 0
    if os.geteuid() != 0:
        print("browser tests need Debian's chromium and chromium-driver: "
              "sudo apt-get install -y chromium chromium-driver", file=sys.stderr)
        return 1
    print("installing chromium and chromium-driver for the browser tests …", file=sys.stderr)
    env = {**os.environ, "DEBIAN_FRONTEND": "noninteractive"}
    subprocess.run(["apt-get", "update", "-qq"], check=True, env=env)
    subprocess.run(["apt-get", "install", "-y", "-qq", "chromium", "chromium-driver"], check=True, env=env,
                   stdout=subprocess.DEVNULL)
    return 0 if shutil.which("chromium") and shutil.which("chromedriver") else 1


if __name__ == "__main__":
    sys.exit(main())
