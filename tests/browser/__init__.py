"""Tests that open the HTML report in a real headless Chromium (Debian's `chromium` package)."""
