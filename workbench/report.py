"""The layout report (PDF and HTML)."""
