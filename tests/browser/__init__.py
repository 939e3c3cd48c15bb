"""Browser tests (Playwright and Debian's Chromium against a live server); see conftest.py."""
