"""Reporting: the HTML summary, its charts and the mail."""
