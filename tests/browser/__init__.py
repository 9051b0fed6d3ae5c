"""Browser tests of the dashboard (Playwright on the system Chromium)."""
